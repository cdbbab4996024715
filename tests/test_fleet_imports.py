"""packer/fleet stays below the layout stage: it imports only data modules and solvers."""

import ast
from pathlib import Path

import packer.fleet

ALLOWED_PACKER = {"packer.intake.profile", "packer.intake.job", "packer.intake.identity",
                  "packer.errors", "packer.fleet",
                  "packer.clihelp",   # argparse parsers with examples, for the bench command
                  "packer.layouts"}   # the layout contract only (no engine): checked below
FORBIDDEN = {"trimesh", "yaml", "packer.output.export", "packer.output.report", "packer.nest", "packer.pack3d",
             "packer.layouts.flat", "packer.layouts.powder", "packer.layouts.nested", "packer.pipeline", "packer.cli", "packer.intake.parts", "packer.intake.footprint"}


def test_fleet_imports_only_what_it_may():
    folder = Path(packer.fleet.__file__).parent
    seen = set()
    for path in sorted(folder.glob("*.py")):
        tree = ast.parse(path.read_text(), filename=str(path))
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.module:
                names = [node.module]
            else:
                continue
            for name in names:
                seen.add(name)
                assert not any(name == f or name.startswith(f + ".") for f in FORBIDDEN), (path.name, name)
                if name.startswith("packer"):
                    assert any(name == a or name.startswith(a + ".") for a in ALLOWED_PACKER), (path.name, name)
    assert "ortools.sat.python" in seen     # the planner does use CP-SAT
