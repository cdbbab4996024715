"""Data flows one way: a stage never imports the stages after it."""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parent.parent / "packer"

# what each stage must not import (modules of packer or third-party libraries)
FORBIDDEN = {
    "nest": {"trimesh", "yaml", "ortools", "packer.job", "packer.parts", "packer.fleet", "packer.pack3d",
             "packer.plan", "packer.export", "packer.report", "packer.pipeline"},
    "pack3d": {"yaml", "ortools", "packer.job", "packer.fleet", "packer.nest", "packer.plan",
               "packer.export", "packer.report", "packer.pipeline"},
    "fleet": {"trimesh", "yaml", "packer.parts", "packer.export", "packer.report", "packer.pipeline",
              "packer.plan", "packer.output"},
    "job.py": {"trimesh", "ortools", "packer.parts", "packer.nest", "packer.fleet", "packer.pipeline"},
    "profile.py": {"trimesh", "ortools", "packer.job", "packer.parts", "packer.nest", "packer.fleet"},
    "parts.py": {"ortools", "yaml", "packer.nest", "packer.fleet", "packer.pack3d", "packer.plan",
                 "packer.pipeline"},
    "export.py": {"ortools", "packer.fleet", "packer.nest", "packer.pipeline"},
    "report": {"ortools", "packer.pipeline", "packer.nest", "packer.pack3d"},
}


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
    return names


def _files(stage: str) -> list[Path]:
    target = PACKAGE / stage
    return sorted(target.rglob("*.py")) if target.is_dir() else [target]


@pytest.mark.parametrize("stage", sorted(FORBIDDEN))
def test_stage_imports_only_earlier_stages(stage):
    files = _files(stage)
    assert files and all(f.exists() for f in files)
    for f in files:
        for name in _imports(f):
            for bad in FORBIDDEN[stage]:
                assert not (name == bad or name.startswith(bad + ".")), f"{f.relative_to(PACKAGE)} imports {name}"
