"""A heat recorded in the logbook, replayed: the record it becomes and the chemistry its steps predict."""

from __future__ import annotations

from datetime import datetime
from pathlib import Path

import pytest

from meltfix.base.errors import InputError
from meltfix.plan.planner import Planner
from meltfix.records.heat_record import record_from_history
from meltfix.records.logbook import Logbook
from meltfix.records.replay import replay
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import RecipeBook

# The hand book (tests/conftest.py): FeMn test (80 % Mn, recovery 0.9) and FeSi test (75 % Si, recovery
# 0.8), grade "Test steel" (Mn 0.60-0.90, Si 0.15-0.35), so every figure can be worked by hand.
DAY = datetime(2026, 3, 9)


def _at(hh: int, mm: int) -> datetime:
    return DAY.replace(hour=hh, minute=mm)


def _record_heat(path: Path, book: RecipeBook) -> int:
    """Three samples, a plan, the additions made from it and a top-up made without one."""
    with Logbook(path, book) as logbook:
        first = Analysis({"Mn": 0.50, "Si": 0.20})
        logbook.record_sample("LB-1", "S1", first, when=_at(10, 0), temperature_c=1600)
        heat = Heat("LB-1", "Test steel", 10_000.0, first, capacity_kg=12_000.0, temperature_c=1600)
        plan_id = logbook.record_plan(heat, Planner(book).plan(heat), _at(10, 2))
        logbook.record_additions("LB-1", [("FeMn test", 40.0), ("FeSi test", 10.0)], plan_id, _at(10, 4))
        logbook.record_sample("LB-1", "S2", Analysis({"Mn": 0.77, "Si": 0.26}), when=_at(10, 12))
        logbook.record_additions("LB-1", [("FeMn test", 5.0)], None, _at(10, 15))
        logbook.record_sample("LB-1", "S3", Analysis({"Mn": 0.80, "Si": 0.26}), when=_at(10, 25))
    return plan_id


def _mass_balance(bath_kg: float, pct: dict[str, float],
                  made: list[tuple[float, float, float, str]]) -> tuple[float, dict[str, float]]:
    """The mass balance written out again: made = (kg, content fraction a, recovery r, element); the rest is
    iron, which dissolves whole. m = W c + sum(a r x); M = W + sum(x (a r + (1 - a)))."""
    element_kg = {s: bath_kg * p / 100.0 for s, p in pct.items()}
    final_kg = bath_kg
    for kg, a, r, symbol in made:
        element_kg[symbol] += kg * a * r
        final_kg += kg * (a * r + (1.0 - a))
    return final_kg, {s: 100.0 * m / final_kg for s, m in element_kg.items()}


def test_a_logbook_heat_replays_with_the_mass_balance_of_its_actual_additions(
        tmp_path: Path, hand_book: RecipeBook) -> None:
    path = tmp_path / "logbook.sqlite"
    _record_heat(path, hand_book)
    with Logbook(path, create=False) as logbook:
        record = record_from_history(logbook.heat_history("LB-1"), hand_book)

    assert (record.heat_id, record.grade, record.bath_kg, record.capacity_kg) == ("LB-1", "Test steel", 10_000.0,
                                                                                  12_000.0)
    assert [(s.sample_id, s.clock, s.minute) for s in record.samples] == [
        ("S1", "10:00", 0.0), ("S2", "10:12", 12.0), ("S3", "10:25", 25.0)]
    assert [(a.clock, a.material, a.kg) for a in record.additions] == [
        ("10:04", "FeMn test", 40.0), ("10:04", "FeSi test", 10.0), ("10:15", "FeMn test", 5.0)]
    assert record.samples[0].temperature_c == 1600 and record.date == "2026-03-09"

    first, second, third = replay(record, hand_book)

    # By hand (the mass balance): Mn 10000 x 0.0050 + 40 x 0.80 x 0.9 = 50 + 28.8 = 78.8 kg;
    # Si 10000 x 0.0020 + 10 x 0.75 x 0.8 = 20 + 6.0 = 26.0 kg; bath 10000 + 40 x (0.72 + 0.20)
    # + 10 x (0.60 + 0.25) = 10000 + 36.8 + 8.5 = 10045.3 kg -> Mn 0.784446 %, Si 0.258827 %.
    assert first.final_kg == pytest.approx(10_045.3)
    assert first.predicted_pct["Mn"] == pytest.approx(0.784446, abs=1e-6)
    assert first.predicted_pct["Si"] == pytest.approx(0.258827, abs=1e-6)
    assert first.actual_cost == pytest.approx(40 * 2.0 + 10 * 1.5)
    assert first.measured_next_pct == {"Mn": 0.77, "Si": 0.26}

    # Each step against the mass balance written again above, from the bath the step before left.
    expected = [
        _mass_balance(10_000.0, {"Mn": 0.50, "Si": 0.20}, [(40.0, 0.80, 0.9, "Mn"), (10.0, 0.75, 0.8, "Si")]),
        _mass_balance(10_045.3, {"Mn": 0.77, "Si": 0.26}, [(5.0, 0.80, 0.9, "Mn")]),
        _mass_balance(10_049.9, {"Mn": 0.80, "Si": 0.26}, []),
    ]
    for step, (final_kg, pct) in zip((first, second, third), expected, strict=True):
        assert step.final_kg == pytest.approx(final_kg, rel=1e-12)
        for symbol, value in pct.items():
            assert step.predicted_pct[symbol] == pytest.approx(value, rel=1e-12), symbol
    assert second.bath_kg == pytest.approx(10_045.3) and third.bath_kg == pytest.approx(10_049.9)
    assert [a.material for a in second.actual] == ["FeMn test"] and third.actual == ()
    assert third.next_sample is None


def test_replanning_the_first_sample_gives_the_plan_the_logbook_holds(tmp_path: Path, hand_book: RecipeBook) -> None:
    path = tmp_path / "logbook.sqlite"
    _record_heat(path, hand_book)
    with Logbook(path, create=False) as logbook:
        history = logbook.heat_history("LB-1")
    first = replay(record_from_history(history, hand_book), hand_book)[0]
    assert first.plan is not None
    recorded = {line.material: line.kg for line in history.plans[0].lines}
    assert {a.material: a.kg for a in first.plan.additions} == pytest.approx(recorded, rel=1e-9)


def test_a_heat_without_samples_or_plans_is_refused_with_its_name(tmp_path: Path, hand_book: RecipeBook) -> None:
    with Logbook(tmp_path / "logbook.sqlite", hand_book) as logbook:
        logbook.record_additions("LB-2", [("FeMn test", 20.0)], when=_at(11, 0))
        logbook.record_sample("LB-3", "S1", Analysis({"Mn": 0.5}), when=_at(12, 0))
        with pytest.raises(InputError, match="logbook heat LB-2: samples: no sample is recorded"):
            record_from_history(logbook.heat_history("LB-2"), hand_book)
        with pytest.raises(InputError, match="logbook heat LB-3: plans: the heat was never planned"):
            record_from_history(logbook.heat_history("LB-3"), hand_book)
