"""Data flows one way: a stage never imports the stages after it, and no stage imports the bench wing."""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parent.parent / "packer"

LATER_THAN_INTAKE = {"packer.layouts", "packer.nest", "packer.pack3d", "packer.fleet", "packer.pipeline",
                     "packer.output", "packer.replan", "packer.inspect", "packer.cli", "packer.bench"}
# what each stage must not import (modules of packer or third-party libraries)
FORBIDDEN = {
    "nest": {"trimesh", "yaml", "ortools", "packer.intake", "packer.layouts", "packer.fleet", "packer.pack3d",
             "packer.output", "packer.pipeline", "packer.replan", "packer.bench"},
    "pack3d": {"yaml", "ortools", "packer.intake", "packer.layouts", "packer.fleet", "packer.nest",
               "packer.output", "packer.pipeline", "packer.replan", "packer.bench"},
    "intake": {"ortools"} | LATER_THAN_INTAKE,
    "layouts": {"yaml", "ortools", "packer.fleet", "packer.output", "packer.pipeline", "packer.replan",
                "packer.bench"},
    # the contract alone: the planner imports it, so it loads no engine and no geometry
    "layouts/__init__.py": {"yaml", "ortools", "numpy", "shapely", "trimesh", "packer.intake", "packer.nest",
                            "packer.pack3d", "packer.layouts.flat", "packer.layouts.powder", "packer.layouts.nested",
                            "packer.fleet", "packer.output", "packer.pipeline",
                            "packer.replan", "packer.bench"},
    "fleet": {"trimesh", "yaml", "packer.intake.parts", "packer.intake.pose", "packer.intake.mesh",
              "packer.nest", "packer.pack3d",
              "packer.output", "packer.pipeline", "packer.replan", "packer.bench"},
    "output": {"ortools", "packer.nest", "packer.pack3d", "packer.fleet", "packer.pipeline", "packer.replan",
               "packer.bench"},
    "pipeline": {"packer.nest", "packer.pack3d", "packer.replan", "packer.bench"},
    "replan": {"packer.nest", "packer.pack3d", "packer.bench"},
    "cli.py": {"packer.bench"},
}


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            assert node.level == 0, f"{path.relative_to(PACKAGE)}: relative import (write packer.… in full)"
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


def test_every_module_is_in_a_checked_stage():
    """A new top-level module or folder must be placed in the flow above (or be a thin command shell)."""
    shells = {"__init__.py", "__main__.py", "errors.py", "limits.py", "clihelp.py", "progress.py", "inspect.py",
              "bench"}
    for entry in PACKAGE.iterdir():
        if entry.name.startswith((".", "_")) and entry.name not in ("__init__.py", "__main__.py"):
            continue
        assert entry.name in FORBIDDEN or entry.name in shells, f"packer/{entry.name} is in no stage"
