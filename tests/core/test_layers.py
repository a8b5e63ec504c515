"""The package's layers: data flows one way, a lower layer never imports a higher one.

The folders of meltfix/ are layers (DEVELOPERS.md draws the map). These tests read every module's
imports, wherever they sit (top of file, inside a function or under TYPE_CHECKING), so a lazy import
cannot hide a wrong direction.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

import meltfix

PACKAGE = Path(meltfix.__file__).parent

# Lowest first. A module may import its own layer and any below it.
LAYERS = ("base", "shop", "plan", "readers", "records", "present", "tui", "commands", "cli")


def _layer(module: str) -> int:
    parts = module.split(".")
    if parts == ["meltfix"]:
        return 0  # the package itself holds only the version
    if parts[1] == "__main__":
        return LAYERS.index("cli")
    assert parts[1] in LAYERS, f"{module} sits in no layer: add its folder to LAYERS and DEVELOPERS.md"
    return LAYERS.index(parts[1])


def _modules() -> dict[str, Path]:
    found = {}
    for path in PACKAGE.rglob("*.py"):
        if "_data" in path.parts:
            continue
        relative = path.relative_to(PACKAGE.parent).with_suffix("")
        name = ".".join(relative.parts)
        found[name.removesuffix(".__init__")] = path
    return found


def _imports(module: str, path: Path) -> list[tuple[int, str]]:
    tree = ast.parse(path.read_text(encoding="utf-8"), str(path))
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    seen = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            seen += [(node.lineno, alias.name) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                base = ".".join(package.split(".")[: len(package.split(".")) - node.level + 1] + ([base] if base else []))
            seen.append((node.lineno, base))
    return [(line, name) for line, name in seen if name == "meltfix" or name.startswith("meltfix.")]


def test_every_module_sits_in_a_layer() -> None:
    for module in _modules():
        _layer(module)


def test_no_layer_imports_a_higher_one() -> None:
    wrong = []
    for module, path in _modules().items():
        for line, imported in _imports(module, path):
            if _layer(imported) > _layer(module):
                wrong.append(f"{path.relative_to(PACKAGE.parent)}:{line} ({LAYERS[_layer(module)]}) imports "
                             f"{imported} ({LAYERS[_layer(imported)]})")
    assert not wrong, "\n".join(wrong)


def test_the_layer_test_sees_a_wrong_import(tmp_path: Path) -> None:
    # The checker itself, on a made-up module: base importing the planner is caught.
    module = tmp_path / "bad.py"
    module.write_text("def f():\n    from meltfix.plan.planner import Planner\n", encoding="utf-8")
    imported = [name for _, name in _imports("meltfix.base.bad", module)]
    assert imported == ["meltfix.plan.planner"] and _layer(imported[0]) > _layer("meltfix.base.bad")


@pytest.mark.parametrize("module", ["meltfix.plan.result", "meltfix.plan.numbers", "meltfix.records.logbook",
                                    "meltfix.present.render", "meltfix.tui.ticket"])
def test_results_storage_and_rendering_load_no_solver(module: str) -> None:
    # Reading a heat's history or printing a plan must not pay for the solver.
    code = (f"import sys, {module}\n"
            "loaded = [m for m in ('highspy', 'scipy', 'meltfix.plan.planner', 'meltfix.plan.plan_model') "
            "if m in sys.modules]\n"
            "assert not loaded, loaded\n")
    subprocess.run([sys.executable, "-c", code], check=True)


def test_the_result_module_needs_no_numpy() -> None:
    code = "import sys, meltfix.plan.result, meltfix.plan.numbers\nassert 'numpy' not in sys.modules\n"
    subprocess.run([sys.executable, "-c", code], check=True)
