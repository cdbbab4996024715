"""The code keeps the shape the contributor guide asks for: small modules, small functions,
no private names borrowed across modules. Numba kernels are exempt from the function size
(their loops are written out on purpose; common practice, no source)."""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parent.parent / "packer"
MODULE_LINES = 400
FUNCTION_LINES = 80
FILES = sorted(PACKAGE.rglob("*.py"))


def _is_kernel(node: ast.AST) -> bool:
    return any("jit" in ast.unparse(d) for d in getattr(node, "decorator_list", ()))


@pytest.mark.parametrize("path", FILES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_module_is_small(path):
    lines = path.read_text(encoding="utf-8").count("\n")
    assert lines <= MODULE_LINES, f"{path.relative_to(PACKAGE)}: {lines} lines (at most {MODULE_LINES})"


@pytest.mark.parametrize("path", FILES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_functions_are_small(path):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    long = [f"{n.name} ({n.end_lineno - n.lineno + 1} lines)" for n in ast.walk(tree)
            if isinstance(n, (ast.FunctionDef, ast.AsyncFunctionDef)) and not _is_kernel(n)
            and n.end_lineno - n.lineno + 1 > FUNCTION_LINES]
    assert not long, f"{path.relative_to(PACKAGE)}: " + ", ".join(long)


@pytest.mark.parametrize("path", FILES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_no_private_name_imported_from_another_module(path):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    borrowed = [f"{n.module}.{a.name}" for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)
                and (n.module or "").startswith("packer") for a in n.names
                if a.name.startswith("_") and not a.name.startswith("__")]
    assert not borrowed, f"{path.relative_to(PACKAGE)} imports private names: {', '.join(borrowed)}"

