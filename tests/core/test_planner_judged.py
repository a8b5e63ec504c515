"""A plan is judged after it is solved: its status is its own re-check, its minimum additions hold
exactly, and the solver writes nothing to the terminal, at any bath weight.

The checks here are the planner's own contract (x = 0 or x >= min; a plan is "optimal"
only when every window is met); the outside checks of the maths are in test_planner*.py.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import pytest

from meltfix.base.paths import default_recipes_dir, demo_dir
from meltfix.plan.planner import Planner
from meltfix.plan.result import LIMIT_TOL_PCT, PlanOptions
from meltfix.shop.heat import load_heat
from meltfix.shop.recipes import load_recipes
from meltfix.shop.settings import DEFAULT_MAX_BATH_KG

# The demo shop's bath_kg_range (5-150 t) would stop these baths as slips: open it for the test.
ANY_BATH = f"bath_kg_range = [0, {DEFAULT_MAX_BATH_KG:.0f}]"

BATHS_KG = (0.01, 0.1, 1.0, 55.0, 5_000.0, 45_000.0, 400_000.0)


@pytest.mark.parametrize("continuous", [False, True], ids=["packs", "loose"])
def test_status_and_minimums_hold_after_rounding_at_every_bath(continuous: bool, capfd: pytest.CaptureFixture[str]) -> None:
    demo = load_recipes()
    book = replace(demo, settings=replace(demo.settings, bath_kg_range=(0.0, DEFAULT_MAX_BATH_KG)))
    planner = Planner(book)
    for path in sorted((demo_dir() / "heats").glob("*.toml")):
        base = load_heat(path, book)
        for bath_kg in BATHS_KG:
            capacity_kg = None if base.capacity_kg is None else bath_kg * base.capacity_kg / base.bath_kg
            heat = base.with_changes(bath_kg=bath_kg, capacity_kg=capacity_kg)
            plan = planner.plan(heat, PlanOptions(continuous=continuous))
            where = f"{heat.heat_id} at {bath_kg} kg"
            missed = {(c.element, c.limit) for c in plan.checks if c.margin_pct < -LIMIT_TOL_PCT}
            assert plan.status == ("closest" if missed else "optimal"), where
            assert {(v.element, v.limit) for v in plan.violations} == missed, where
            for line in plan.additions:
                material = book.material(line.material)
                if line.material not in heat.locked_kg:
                    assert line.kg >= material.min_kg, (where, line)  # exactly, not within a tolerance
                if line.packs is not None:
                    assert line.kg == line.packs * material.pack_kg, (where, line)
    # HiGHS can write below Python's sys.stdout, straight to file descriptor 1 (seen with HiGHS 1.12).
    out = capfd.readouterr().out
    assert out == "", out[:200]


def test_solve_json_stays_clean_at_a_tenth_of_a_kilogram(tmp_path: Path) -> None:
    # Regression: at a 0.1 kg bath HiGHS printed debug text to stdout, which broke --json.
    text = (demo_dir() / "heats" / "KB-24105.toml").read_text()
    heat = tmp_path / "tiny.toml"
    heat.write_text(text.replace("bath_kg = 45000", "bath_kg = 0.1").replace("capacity_kg = 48000", ""))
    recipes = tmp_path / "recipes"
    shutil.copytree(default_recipes_dir(), recipes)
    shop = recipes / "shop.toml"
    shop.write_text(shop.read_text(encoding="utf-8").replace("bath_kg_range = [5000, 150000]", ANY_BATH),
                    encoding="utf-8")
    for extra in ([], ["--continuous"], ["--no-aim"]):
        done = subprocess.run([sys.executable, "-c", "import sys; from meltfix.cli import main; sys.exit(main())",
                               "solve", str(heat), "--json", "--recipes", str(recipes), *extra],
                              capture_output=True, text=True, check=False)
        lines = done.stdout.splitlines()
        assert len(lines) == 1, done.stdout[:300]
        assert json.loads(lines[0])["heat"] == "KB-24105", extra
        assert "Traceback" not in done.stderr
