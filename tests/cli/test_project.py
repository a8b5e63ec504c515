"""The project's own promises: CI runs the README's test command; the data ships with a normal install."""

from __future__ import annotations

import gc
import os
import re
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

from meltfix.cli import COLLECT_EVERY, COMMANDS, main, set_up_process

ROOT = Path(__file__).resolve().parents[2]


def _quick_start_commands() -> list[str]:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```\n(.+?)\n```", section)


def test_readme_quick_start_has_exactly_two_commands() -> None:
    commands = _quick_start_commands()
    assert len(commands) == 2
    assert "meltfix" in commands[0] and "pytest" in commands[1]


def test_ci_runs_the_readme_test_command_verbatim() -> None:
    test_command = _quick_start_commands()[1]
    assert test_command in (ROOT / ".ci" / "run").read_text(encoding="utf-8")


def test_the_console_script_runs_the_program_set_up() -> None:
    assert 'meltfix = "meltfix.cli:program"' in (ROOT / "pyproject.toml").read_text(encoding="utf-8")


def test_the_program_sets_up_its_process_keeping_the_users_own_setting(monkeypatch: pytest.MonkeyPatch) -> None:
    threshold = gc.get_threshold()
    try:
        monkeypatch.setenv("OPENBLAS_NUM_THREADS", "")
        monkeypatch.delenv("OPENBLAS_NUM_THREADS")
        set_up_process()
        assert os.environ["OPENBLAS_NUM_THREADS"] == "1" and gc.get_threshold()[0] == COLLECT_EVERY
        monkeypatch.setenv("OPENBLAS_NUM_THREADS", "4")
        set_up_process()
        assert os.environ["OPENBLAS_NUM_THREADS"] == "4"
    finally:
        gc.set_threshold(*threshold)


def test_help_lists_every_command(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as stop:
        main(["--help"])
    assert stop.value.code == 0
    out = capsys.readouterr().out
    for name in COMMANDS:
        assert name in out


@pytest.mark.slow
def test_wheel_carries_recipes_and_demo(tmp_path: Path) -> None:
    """A normal (non-editable) install must find the built-in data without the source tree."""
    built = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(tmp_path), str(ROOT)],
                           capture_output=True, text=True)
    if built.returncode != 0:
        pytest.skip(f"cannot build a wheel here: {built.stderr.strip()[-200:]}")
    wheel = next(tmp_path.glob("meltfix-*.whl"))
    site = tmp_path / "site"
    with zipfile.ZipFile(wheel) as archive:
        names = archive.namelist()
        archive.extractall(site)
    assert "meltfix/_data/recipes/materials.toml" in names
    assert any(n.startswith("meltfix/_data/recipes/grades/") for n in names)
    assert any(n.startswith("meltfix/_data/demo/") for n in names)
    # Run from an empty folder with only the unpacked wheel on the path: no source tree to fall back on.
    code = ("import meltfix.base.paths as p, meltfix.shop.recipes as r; "
            "assert '_data' in str(p.default_recipes_dir()), p.default_recipes_dir(); "
            "book = r.load_recipes(); print(len(book.materials), len(book.grades))")
    out = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, env={"PYTHONPATH": str(site), "PATH": ""},
                         capture_output=True, text=True)
    assert out.returncode == 0, out.stderr


def test_readme_heat_example_plans(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """The HEAT.toml shown in the README is a real heat file for the built-in shop."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    example = re.search(r"```toml\n(.*?)```", readme, re.S)
    assert example is not None
    heat = tmp_path / "example.toml"
    heat.write_text(example.group(1), encoding="utf-8")
    assert main(["solve", str(heat), "--json"]) == 0
    assert '"status": "optimal"' in capsys.readouterr().out
