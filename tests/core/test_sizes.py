"""Modules and functions stay small enough to read in one sitting: a module of the package is at
most about 400 lines and a function about 60, unless its docstring says why in a line starting
"Long because:" (a reason a reader can check, not a waiver)."""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[2] / "meltfix"
MODULE_LINES = 400
FUNCTION_LINES = 60
REASON = "Long because:"


def _has_reason(node: ast.Module | ast.FunctionDef | ast.AsyncFunctionDef) -> bool:
    docstring = ast.get_docstring(node) or ""
    return any(line.strip().startswith(REASON) for line in docstring.splitlines())


def _oversized() -> list[str]:
    found = []
    for path in sorted(PACKAGE.rglob("*.py")):
        source = path.read_text(encoding="utf-8")
        tree = ast.parse(source)
        name = path.relative_to(PACKAGE.parent)
        lines = len(source.splitlines())
        if lines > MODULE_LINES and not _has_reason(tree):
            found.append(f"{name}: {lines} lines")
        for node in ast.walk(tree):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                length = (node.end_lineno or node.lineno) - node.lineno + 1
                if length > FUNCTION_LINES and not _has_reason(node):
                    found.append(f"{name}:{node.lineno} {node.name}(): {length} lines")
    return found


def test_no_module_or_function_is_too_long_without_a_reason() -> None:
    assert _oversized() == [], (f"split these, or say why in a line starting {REASON!r} in the docstring "
                                f"(modules over {MODULE_LINES} lines, functions over {FUNCTION_LINES})")


def test_the_check_finds_a_long_function_and_accepts_a_reason() -> None:
    body = "\n".join(f"    x{k} = {k}" for k in range(FUNCTION_LINES + 1))
    plain = ast.parse(f"def long():\n{body}\n").body[0]
    reasoned = ast.parse(f'def long():\n    """Long because: one table of constants."""\n{body}\n').body[0]
    assert not _has_reason(plain) and _has_reason(reasoned)
