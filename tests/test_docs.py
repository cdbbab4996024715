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


PACKAGE_READMES = sorted((ROOT / "packer").rglob("README.md"))
# the independent checkers live outside the repository (DEVELOPERS.md, "Benchmarks")
CHECKERS = {"verify_plan.py", "verify_nest.py", "verify_boxes.py"}


def test_every_module_path_in_the_docs_exists():
    """Every `packer/...py` file and `packer/.../` folder named in the docs exists (a move updates the docs)."""
    for path in [*DOCS, *PACKAGE_READMES]:
        text = path.read_text(encoding="utf-8")
        named = set(re.findall(r"packer/[\w/]+\.py", text))
        missing = sorted(p for p in named if not (ROOT / p).is_file())
        folders = set(re.findall(r"packer/[\w/]*\w/(?=[`\s),;:])", text))
        missing += sorted(f for f in folders if not (ROOT / f).is_dir())
        assert not missing, f"{path.relative_to(ROOT)} names {missing}"


def test_package_readmes_name_their_own_files():
    """A bare `name.py` in a folder's README is a file of that folder (full paths for files elsewhere)."""
    assert PACKAGE_READMES
    for path in PACKAGE_READMES:
        text = re.sub(r"[\w/]+/\w+\.py", "", path.read_text(encoding="utf-8"))   # paths checked above
        named = set(re.findall(r"`(\w+\.py)`", text)) - CHECKERS
        missing = sorted(n for n in named if not (path.parent / n).is_file())
        assert not missing, f"{path.relative_to(ROOT)} names {missing}, not in {path.parent.relative_to(ROOT)}/"
