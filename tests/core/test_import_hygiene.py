"""The core stays importable without the screen framework (STYLE.md: import hygiene)."""

from __future__ import annotations

import pkgutil
import subprocess
import sys

import meltfix


def _core_modules() -> list[str]:
    names = []
    for info in pkgutil.walk_packages(meltfix.__path__, "meltfix."):
        if not info.name.startswith("meltfix.tui"):
            names.append(info.name)
    return names


def test_core_never_imports_textual() -> None:
    code = (
        "import importlib, sys\n"
        f"for name in {_core_modules()!r}:\n"
        "    importlib.import_module(name)\n"
        "assert 'textual' not in sys.modules, sorted(m for m in sys.modules if m.startswith('textual'))\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True)


def test_plain_command_line_loads_neither_textual_nor_pandas() -> None:
    code = (
        "import sys\n"
        "from meltfix.cli import build_parser\n"
        "build_parser()\n"
        "bad = [m for m in ('textual', 'pandas') if m in sys.modules]\n"
        "assert not bad, bad\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True)


def test_planning_never_imports_scipy() -> None:
    """The planner runs on highspy, the odds on NumPy and the standard library; SciPy's optimiser
    and then its special functions took most of a one-heat `meltfix solve`."""
    code = (
        "import sys\n"
        "import meltfix.plan.planner, meltfix.plan.risk\n"
        "assert 'scipy' not in sys.modules\n"
        "from meltfix.shop.heat import load_heat\n"
        "from meltfix.base.paths import demo_dir\n"
        "from meltfix.shop.recipes import load_recipes\n"
        "book = load_recipes()\n"
        "for path in sorted((demo_dir() / 'heats').glob('*.toml')):\n"
        "    meltfix.plan.planner.plan_heat(load_heat(path, book), book)\n"
        "    meltfix.plan.risk.plan_to_target(load_heat(path, book), book, draws=200)\n"
        "assert 'scipy' not in sys.modules, sorted(m for m in sys.modules if m.startswith('scipy'))\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True)


def test_help_imports_only_the_parser() -> None:
    code = (
        "import sys\n"
        "from meltfix.cli import main\n"
        "try:\n"
        "    main(['--help'])\n"
        "except SystemExit:\n"
        "    pass\n"
        "loaded = sorted(m for m in sys.modules if m.startswith('meltfix'))\n"
        "assert loaded == ['meltfix', 'meltfix.base', 'meltfix.base.errors', 'meltfix.cli', 'meltfix.commands',\n"
        "                  'meltfix.commands.exits'], loaded\n"
        "assert not [m for m in ('numpy', 'rich', 'tomllib') if m in sys.modules]\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True, capture_output=True)


def test_the_screen_opens_without_its_dialogs_nor_the_solver() -> None:
    """Dialogs load when first opened, the solver in the first plan's worker (after the first frame)."""
    code = (
        "import sys\n"
        "import meltfix.tui.app\n"
        "later = ('meltfix.tui.screens.added', 'meltfix.tui.screens.choice', 'meltfix.tui.screens.help',\n"
        "         'meltfix.tui.screens.materials', 'meltfix.tui.screens.open_file', 'meltfix.tui.screens.prompt',\n"
        "         'meltfix.plan.risk', 'meltfix.plan.planner', 'highspy')\n"
        "loaded = [m for m in later if m in sys.modules]\n"
        "assert not loaded, loaded\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True)
