"""Plans made on several threads at once equal the plans made one at a time.

The Planner keeps hot solver models and hands each thread its own; every solve starts from no
basis, so a heat's plan depends on the heat alone, not on which thread planned it or what that
model planned before.
"""

from __future__ import annotations

import random
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest

from meltfix.base.paths import demo_dir
from meltfix.plan.planner import Planner
from meltfix.plan.result import PlanOptions
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat, load_heat
from meltfix.shop.recipes import load_recipes

HEATS = 200
THREADS = 4


def shaken_heats(count: int) -> list[Heat]:
    """Demo heats with bath ±15 % and each content ×0.8–1.2 (seeded): optimal and closest plans."""
    book = load_recipes()
    base = [load_heat(path, book) for path in sorted((demo_dir() / "heats").glob("*.toml"))]
    rng = np.random.default_rng(11)
    heats = []
    for k in range(count):
        heat = base[k % len(base)]
        bath_kg = heat.bath_kg * rng.uniform(0.85, 1.15)
        capacity_kg = None if heat.capacity_kg is None else bath_kg * heat.capacity_kg / heat.bath_kg
        analysis = Analysis({s: v * rng.uniform(0.8, 1.2) for s, v in heat.analysis.pct.items()},
                            heat.analysis.below_limit)
        heats.append(heat.with_changes(heat_id=f"{heat.heat_id}-{k}", bath_kg=bath_kg, capacity_kg=capacity_kg,
                                       analysis=analysis))
    return heats


@pytest.mark.slow  # every demo heat, planned on four threads and on one
def test_four_threads_plan_what_one_thread_plans() -> None:
    book = load_recipes()
    heats = shaken_heats(HEATS)
    options = PlanOptions(continuous=True)
    alone = [Planner(book).plan(heat, options).to_json() for heat in heats]
    assert {plan["status"] for plan in alone} == {"optimal", "closest"}  # both paths are exercised

    shared = Planner(book)

    def plan_all(seed: int) -> list[tuple[int, dict[str, object]]]:
        order = list(range(HEATS))
        random.Random(seed).shuffle(order)  # each thread meets the heats in its own order
        return [(k, shared.plan(heats[k], options).to_json()) for k in order]

    with ThreadPoolExecutor(max_workers=THREADS) as pool:
        results = list(pool.map(plan_all, range(THREADS)))
    for thread in results:
        for k, plan in thread:
            assert plan == alone[k], heats[k].heat_id
