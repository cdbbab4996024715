"""Doc references are true: cited sections exist, pictures exist, commands use no folder a clone lacks."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DOCS = [ROOT / "README.md", ROOT / "DEVELOPERS.md"]


def _sections(path: Path) -> set[str]:
    return {m.group(1).strip() for m in re.finditer(r"^#+ (.+)$", path.read_text(encoding="utf-8"), re.M)}


def test_cited_developers_sections_exist():
    have = _sections(ROOT / "DEVELOPERS.md")
    cited = set()
    for path in [*DOCS, *sorted((ROOT / "plates").glob("*.yaml"))]:
        cited |= set(re.findall(r'DEVELOPERS\.md, "([^"]+)"', path.read_text(encoding="utf-8")))
    assert cited and cited <= have, cited - have


def test_readme_pictures_exist():
    pictures = re.findall(r"!\[[^\]]*\]\(([^)]+)\)", (ROOT / "README.md").read_text(encoding="utf-8"))
    assert pictures
    for p in pictures:
        assert (ROOT / p).is_file(), p


def test_doc_commands_use_no_folder_outside_the_clone():
    for path in DOCS:
        blocks = re.findall(r"```[a-z]*\n(.*?)```", path.read_text(encoding="utf-8"), re.S)
        for line in "\n".join(blocks).splitlines():
            assert "../" not in line, f"{path.name}: {line}"
