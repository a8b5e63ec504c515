"""Replay of recorded heats: a hand-computed heat, every demo record, the training score, bad files."""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import pytest

from meltfix.base.errors import InputError
from meltfix.base.paths import demo_dir
from meltfix.plan.risk import RiskPlanner
from meltfix.records.heat_record import load_record, parse_record
from meltfix.records.replay import element_paths, replay, replay_json, summarise
from meltfix.records.training import parse_entry, score_entry
from meltfix.shop.recipes import RecipeBook, load_recipes

RECORDS = sorted((demo_dir() / "records").glob("*.toml"))

# The hand book (tests/conftest.py): FeMn test (80 % Mn, recovery 0.9, 2.0 a kg) and the grade "Mn steel"
# (Mn 0.60-0.90, aim 0.75), so every figure can be worked by hand.
RECORD = """
heat = "HAND-1"
grade = "Mn steel"
bath_kg = 10000
[[sample]]
id = "S1"
time = "10:00"
[sample.analysis]
Mn = 0.50
[[sample]]
id = "S2"
time = "10:12"
[sample.analysis]
Mn = 0.77
[[addition]]
time = "10:04"
material = "FeMn test"
kg = 40
"""


def _record_file(tmp_path: Path, body: str, name: str = "rec.toml") -> Path:
    path = tmp_path / name
    path.write_text(body, encoding="utf-8")
    return path


def test_hand_computed_two_sample_heat(tmp_path: Path, hand_book: RecipeBook) -> None:
    record = load_record(_record_file(tmp_path, RECORD), hand_book)
    first, second = replay(record, hand_book)

    # The mass balance, by hand. FeMn test: a = 0.80 Mn, r = 0.9; the 20 % iron balance
    # dissolves whole, so the mass yield g = 0.80 * 0.9 + 0.20 * 1.0 = 0.92.
    # Planned at S1: the cheapest way to the aim 0.75 (the aim penalty, 5 EUR per kg of Mn off aim,
    # outweighs the 2 EUR / (0.72 - 0.92 * 0.0075) = 2.80 EUR per kg the alloy costs), so the
    # textbook single-addition formula x = W (c_aim - c0) / (r a - g c_aim) holds (common practice):
    # x = 10000 * (0.0075 - 0.0050) / (0.72 - 0.0069) = 25 / 0.7131 = 35.0582 kg, cost 70.1164 EUR.
    assert len(first.planned) == 1
    assert first.planned[0].kg == pytest.approx(35.0582, abs=1e-3)
    assert first.planned_cost == pytest.approx(70.1164, abs=2e-3)
    # Actual: 40 kg at 2.0 EUR/kg = 80 EUR, made at 10:04, between S1 (10:00) and S2 (10:12).
    assert [(a.material, a.kg) for a in first.actual] == [("FeMn test", 40.0)]
    assert first.actual_cost == pytest.approx(80.0)
    # Predicted: Mn 10000 * 0.0050 + 40 * 0.80 * 0.9 = 50 + 28.8 = 78.8 kg in a bath of
    # 10000 + 40 * 0.92 = 10036.8 kg -> 78.8 / 10036.8 = 0.785111 wt %.
    assert first.final_kg == pytest.approx(10036.8)
    assert first.predicted_pct["Mn"] == pytest.approx(0.785111, abs=1e-6)
    # Measured next 0.77: gap 0.77 - 0.785111 = -0.015111 wt %.
    assert first.measured_next_pct == {"Mn": 0.77}
    assert first.gap_pct["Mn"] == pytest.approx(-0.015111, abs=1e-6)
    # Implied recovery: (10036.8 * 0.0077 - 50) / (40 * 0.80) = (77.28336 - 50) / 32 = 0.852605.
    (hint,) = first.recovery_hints
    assert (hint.element, hint.added_kg) == ("Mn", pytest.approx(32.0))
    assert hint.catalogue == pytest.approx(0.9)
    assert hint.implied == pytest.approx(0.852605, abs=1e-6)
    assert first.predicted_misses == () and first.measured_misses == ()
    # S2 starts from the grown bath; Mn 0.77 is inside: no plan is made, nothing was added.
    assert second.bath_kg == pytest.approx(10036.8)
    assert second.inside and second.plan is None and second.planned_cost is None
    assert second.planned == () and second.actual == ()
    assert second.next_sample is None and second.measured_next_pct is None

    doc = replay_json(record, (first, second), hand_book)
    assert doc["heat"] == "HAND-1"
    step = doc["steps"][0]
    for key in ("sample", "planned", "actual", "predicted", "measured_next", "planned_cost", "actual_cost"):
        assert key in step
    assert step["actual_cost"] == pytest.approx(80.0) and doc["steps"][1]["measured_next"] is None
    assert doc["steps"][1]["plan_status"] == "inside" and doc["steps"][1]["plan_needed"] is False
    # meltfix along the same path: its plan at S1 only (S2 needed none); the shop: the 80 EUR added.
    assert doc["planned_total"] == pytest.approx(70.1164, abs=2e-3) and doc["first_needed"] == "S1"
    assert doc["actual_total"] == pytest.approx(80.0) and doc["ended_outside"] is None


def test_training_score_of_known_entries(tmp_path: Path, hand_book: RecipeBook) -> None:
    record = load_record(_record_file(tmp_path, RECORD), hand_book)
    first = replay(record, hand_book)[0]

    # One meltfix cost per sample: the trainee is scored against the plan the replay shows at S1,
    # worked by hand above: 35.0582 kg of FeMn test = 70.1164 EUR.
    # 30 kg: Mn (50 + 30 * 0.72) / (10000 + 30 * 0.92) = 71.6 / 10027.6 = 0.714029 % -> in spec,
    # for 60 EUR, less than the plan: full points.
    score = score_entry(first, parse_entry("femn 30", hand_book), hand_book)
    assert score.in_spec and not score.breaks
    assert score.predicted_pct["Mn"] == pytest.approx(0.714029, abs=1e-6)
    assert score.entry_cost == pytest.approx(60.0)
    assert score.best_cost == pytest.approx(70.1164, abs=2e-3) and score.best_cost == first.planned_cost
    assert score.points == 100
    assert score.extra_cost == pytest.approx(60.0 - 70.1164, abs=2e-3)
    # 50 kg: (50 + 36) / (10000 + 46) = 0.856062 %, inside 0.60-0.90, for 100 EUR:
    # points = round(100 * 70.1164 / 100) = 70.
    dear = score_entry(first, (("FeMn test", 50.0),), hand_book)
    assert dear.in_spec and dear.points == 70

    # 10 kg: (50 + 7.2) / 10009.2 = 0.571474 % < 0.60 -> out of spec, no points.
    short = score_entry(first, (("FeMn test", 10.0),), hand_book)
    assert not short.in_spec and short.points == 0
    assert short.misses and short.misses[0].startswith("Mn min 0.60 %")


def _independent_steps(path: Path, book: RecipeBook) -> list[tuple[float, dict[str, float], dict[str, float] | None]]:
    """The mass balance written again from the raw TOML: (bath after, predicted wt %, measured next)."""
    raw = tomllib.loads(path.read_text(encoding="utf-8"))
    materials = {m.name: m for m in book.materials}
    samples = raw["sample"]
    bath = float(raw["bath_kg"])
    out = []
    for k, sample in enumerate(samples):
        start = sample["time"]
        stop = samples[k + 1]["time"] if k + 1 < len(samples) else "99:99"
        # The demo records use zero-padded "HH:MM", so text order is time order.
        made = [a for a in raw.get("addition", []) if start <= a["time"] < stop]
        element_kg = {s: bath * float(v) / 100 for s, v in sample["analysis"].items()}
        after = bath
        for addition in made:
            material = materials[addition["material"]]
            # A recovery the book gives for this stage replaces the general one.
            recovery = {**material.recovery, **material.recovery_by_stage.get(raw.get("stage", "ladle"), {})}
            for symbol, pct in material.composition_pct.items():
                kg = addition["kg"] * pct / 100 * recovery.get(symbol, 1.0)
                after += kg
                if symbol != "Fe":
                    element_kg[symbol] = element_kg.get(symbol, 0.0) + kg
        predicted = {s: 100 * kg / after for s, kg in element_kg.items()}
        measured = None if k + 1 == len(samples) else {s: float(v) for s, v in samples[k + 1]["analysis"].items()}
        out.append((after, predicted, measured))
        bath = after
    return out


def test_there_are_at_least_five_demo_records() -> None:
    assert len(RECORDS) >= 5


@pytest.mark.parametrize("path", RECORDS, ids=[p.stem for p in RECORDS])
def test_every_demo_record_replays_and_matches_an_independent_mass_balance(path: Path) -> None:
    book = load_recipes()
    record = load_record(path, book)
    steps = replay(record, book)
    assert [s.sample.sample_id for s in steps] == [s.sample_id for s in record.samples]
    for step, (after, predicted, measured) in zip(steps, _independent_steps(path, book), strict=True):
        assert step.final_kg == pytest.approx(after, rel=1e-12)
        for symbol, pct in predicted.items():
            assert step.predicted_pct[symbol] == pytest.approx(pct, rel=1e-9, abs=1e-12), symbol
        assert step.measured_next_pct == measured
        # The planner must answer at every sample of a demo heat that needs a plan (a refusal
        # would show as plan_error); a sample inside the grade gets none.
        if step.inside:
            assert step.plan is None and not step.plan_error
        else:
            assert step.plan is not None, step.plan_error
            assert step.plan.status in ("optimal", "closest")
            assert math.isfinite(step.plan.total_cost)
        assert step.actual_cost >= 0
    paths = element_paths(steps, book.grade(record.grade))
    assert {p.element for p in paths} == set(book.grade(record.grade).window_pct)


def _steps(stem: str):
    book = load_recipes()
    return replay(load_record(demo_dir() / "records" / f"{stem}.toml", book), book)


def test_demo_stories_hold() -> None:
    """Each record's story (in its comment) is what its numbers show."""
    three = _steps("KB-24211")  # three corrections, in spec only at the last sample
    assert sum(1 for s in three if s.actual) == 3
    assert all(s.measured_misses for s in three[:2]) and not three[2].measured_misses
    copper = _steps("KB-24212")  # Cu cannot be diluted below 0.30 inside the vessel
    assert copper[0].plan is not None and copper[0].plan.status == "closest"
    assert any(v.element == "Cu" for v in copper[0].plan.violations)
    assert copper[-1].sample.analysis.pct["Cu"] > 0.30
    carbon = _steps("KB-24213")  # four bags where the plan had two: C over its 0.23 maximum
    raiser = "Carbon raiser (graphitised)"
    assert sum(a.kg for a in carbon[0].actual if a.material == raiser) == 100
    assert sum(a.kg for a in carbon[0].planned if a.material == raiser) == 50
    assert carbon[1].sample.analysis.pct["C"] > 0.23
    manganese = _steps("KB-24214")  # SiMn before aluminium: Mn recovery about 62 %, then normal
    first_mn = next(h for h in manganese[0].recovery_hints if h.element == "Mn")
    later_mn = next(h for h in manganese[1].recovery_hints if h.element == "Mn")
    assert 0.55 < first_mn.implied < 0.70 < 0.85 < later_mn.implied
    clean = _steps("KB-24215")  # one trim, then in spec where the mass balance said
    assert not clean[0].measured_misses and not clean[0].predicted_misses
    assert all(abs(g) < 0.01 for g in clean[0].gap_pct.values())


def test_summary_compares_the_heat_with_meltfix_along_the_same_path() -> None:
    book = load_recipes()
    path = demo_dir() / "records" / "KB-24211.toml"
    steps = replay(load_record(path, book), book)
    summary = summarise(steps)
    # Three corrections, in spec at the last sample, but with Si at its minimum: the risk planner
    # (what `meltfix solve` makes there) plans to lift the odds, so the replay shows that plan;
    # the heat still ended in spec.
    last = steps[-1]
    assert [s.inside for s in steps] == [False] * 4 and last.in_spec
    assert last.plan is not None and last.plan.additions
    assert last.plan == RiskPlanner(book).plan(last.heat).plan
    # The shop: every addition of the file at its catalogue price, summed here from the raw TOML.
    raw = tomllib.loads(path.read_text(encoding="utf-8"))
    prices = {m.name: m.price_per_kg for m in book.materials}
    assert summary.actual_cost == pytest.approx(math.fsum(a["kg"] * prices[a["material"]] for a in raw["addition"]))
    # meltfix: its plan at S1 alone (had it been followed, S2 and S3 would not have needed theirs),
    # never the sum of the three alternative plans.
    assert summary.first_needed == "S1" and summary.meltfix_cost == steps[0].planned_cost
    assert summary.meltfix_cost < math.fsum(s.planned_cost or 0.0 for s in steps)
    assert summary.ended_outside is None and summary.shop_cost == summary.actual_cost


def test_midnight_needs_date_times_and_then_works(tmp_path: Path, hand_book: RecipeBook) -> None:
    body = RECORD.replace('"10:00"', '"23:58"').replace('"10:12"', '"00:10"').replace('"10:04"', '"00:02"')
    with pytest.raises(InputError, match="sample 'S2'.time"):
        load_record(_record_file(tmp_path, body), hand_book)
    dated = (RECORD.replace('"10:00"', "2026-03-14T23:58:00").replace('"10:12"', "2026-03-15T00:10:00")
             .replace('"10:04"', "2026-03-15T00:02:00"))
    first = replay(load_record(_record_file(tmp_path, dated), hand_book), hand_book)[0]
    assert first.next_sample is not None and first.next_sample.minute == pytest.approx(12.0)
    assert [a.kg for a in first.actual] == [40.0]


def test_addition_at_a_sample_time_answers_that_sample(tmp_path: Path, hand_book: RecipeBook) -> None:
    body = RECORD.replace('time = "10:04"', 'time = "10:12"')
    first, second = replay(load_record(_record_file(tmp_path, body), hand_book), hand_book)
    assert first.actual == () and [a.kg for a in second.actual] == [40.0]


@pytest.mark.parametrize(("old", "new", "field"), [
    ('bath_kg = 10000', 'bath_kg = 10000\nbath_mass = 3', "bath_mass"),
    ('grade = "Mn steel"', 'grade = "Nope"', "grade"),
    ('material = "FeMn test"', 'material = "FeMn tset"', "addition #1.material"),
    ('kg = 40', 'kg = -4', "addition #1.kg"),
    ('time = "10:04"', 'time = "09:59"', "addition #1.time"),
    ('time = "10:04"', 'time = "ten past"', "addition #1.time"),
    ('time = "10:12"', 'time = "09:00"', "sample 'S2'.time"),
    ('time = "10:12"', 'time = 2026-03-14T10:12:00', "sample 'S2'.time"),
    ('id = "S2"', 'id = "S1"', "sample 'S1'.id"),
    ('Mn = 0.77', 'Mn = "0,7x"', "sample 'S2'.analysis.Mn"),
    ('Mn = 0.77', 'Mx = 0.77', "sample 'S2'.analysis.Mx"),
    ('[sample.analysis]\nMn = 0.77', 'temperature_c = 1590', "sample 'S2'.analysis"),
    ('bath_kg = 10000', 'bath_kg = 10000\ncapacity_kg = 10020', "sample 'S2'"),
])
def test_bad_records_name_file_and_field(tmp_path: Path, hand_book: RecipeBook, old: str, new: str,
                                         field: str) -> None:
    assert old in RECORD
    path = _record_file(tmp_path, RECORD.replace(old, new, 1))
    with pytest.raises(InputError) as caught:
        replay(load_record(path, hand_book), hand_book)
    assert caught.value.source == str(path)
    assert caught.value.field == field


def test_record_needs_a_sample() -> None:
    with pytest.raises(InputError, match="no \\[\\[sample\\]\\]"):
        parse_record({"grade": "x", "bath_kg": 1000}, "r.toml", "r")


def test_parse_entry(hand_book: RecipeBook) -> None:
    assert parse_entry("FeMn test 12,5 kg;\nfemn 7.5", hand_book) == (("FeMn test", 20.0),)
    assert parse_entry("  ", hand_book) == ()
    for bad, field in (("FeMn test", "entry 1"), ("femn 10; chrome 5", "entry 2"), ("femn -3", "entry 1")):
        with pytest.raises(InputError) as caught:
            parse_entry(bad, hand_book)
        assert caught.value.field == field


def test_entry_breaking_stock_and_forbidden_material_scores_nothing() -> None:
    book = load_recipes()
    first = _steps("KB-24215")[0]
    # SAE 8620 forbids FeB 18 (recipes/grades/sae-8620.toml); FeV 80 has 150 kg in stock.
    score = score_entry(first, (("FeB 18", 5.0), ("FeV 80", 200.0)), book)
    assert score.points == 0
    assert any("must never receive FeB 18" in b for b in score.breaks)
    assert any("200.0 kg of FeV 80 is more than the 150.0 kg in stock" in b for b in score.breaks)


def test_a_record_may_be_at_any_stage_the_shop_lists(tmp_path: Path) -> None:
    # The demo shop lists furnace, ladle and lf (the ladle furnace): a record at the ladle furnace
    # replays, planned with the ladle furnace's own rules; a stage the shop does not list is one line.
    book = load_recipes()
    assert "lf" in book.settings.stages
    body = RECORDS[0].read_text(encoding="utf-8")
    assert 'stage = "ladle"' in body
    path = tmp_path / "at-lf.toml"
    path.write_text(body.replace('stage = "ladle"', 'stage = "lf"', 1), encoding="utf-8")
    record = load_record(path, book)
    assert record.stage == "lf"
    steps = replay(record, book)
    assert steps and all(step.heat.stage == "lf" for step in steps)
    path.write_text(body.replace('stage = "ladle"', 'stage = "converter"', 1), encoding="utf-8")
    with pytest.raises(InputError) as caught:
        load_record(path, book)
    assert (caught.value.source, caught.value.field) == (str(path), "stage")
    assert "furnace, ladle, lf" in caught.value.message
