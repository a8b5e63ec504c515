"""`meltfix solve` end to end (its contract): the rich table, --json, JSON Lines, --no-aim,
--continuous, exit status 0 / 3 / 2, and one clear line on stderr for every kind of bad input.

A small recipe book of our own is written into tmp_path so the figures do not move when the demo
shop's data changes; the heat files are in tests/data/heats/.
"""

from __future__ import annotations

import json
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pytest

from meltfix.cli import main
from meltfix.commands.exits import EXIT_PIPE_CLOSED

ROOT = Path(__file__).resolve().parents[2]
HEATS = ROOT / "tests" / "data" / "heats"

MATERIALS = """\
[[material]]
name = "FeMn"
price_per_kg = 1.4
composition = { Mn = 78.0 }
recovery = { Mn = 0.9, Fe = 0.9 }
stock_kg = 5000

[[material]]
name = "Carbon raiser"
kind = "carbon"
price_per_kg = 0.8
composition = { C = 98.0 }
recovery = { C = 0.9 }
pack_kg = 25
stock_kg = 1000

[[material]]
name = "Clean iron"
kind = "dilution"
price_per_kg = 0.4
composition = { C = 0.02 }
stock_kg = 20000
"""

GRADE = """\
name = "Trim"
[window]
C = [0.40, 0.50]
Mn = [0.80, 0.90]
Cu = [0, 0.30]
S = [0, 0.030]
[aim]
C = 0.45
Mn = 0.85
"""


@pytest.fixture()
def recipes(tmp_path: Path, write_recipes: Callable[..., Path]) -> Path:
    return write_recipes(tmp_path / "recipes", MATERIALS, {"trim.toml": GRADE},
                         'shop_name = "Test shop"\naim_penalty = 0.5\n')


def solve(capsys: pytest.CaptureFixture[str], recipes: Path, *argv: str | Path) -> tuple[int, str, str]:
    status = main(["solve", *map(str, argv), "--recipes", str(recipes)])
    captured = capsys.readouterr()
    return status, captured.out, captured.err


# --------------------------------------------------------------------------------------------
# Output

def test_rich_table_by_default(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    status, out, err = solve(capsys, recipes, HEATS / "trim.toml")
    assert (status, err) == (0, "")
    out = " ".join(out.replace("│", " ").split())  # the panels wrap long cautions at 80 columns
    for text in ("T-trim", "all windows met", "Additions", "FeMn", "Carbon raiser", "Predicted chemistry",
                 "Cautions", "must be dry", "qualified person decides"):
        assert text in out


def test_json_has_the_contract_fields_unrounded(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    # On paper: the exact window, so the closed form below applies.
    status, out, err = solve(capsys, recipes, HEATS / "manganese.toml", "--json", "--no-aim", "--on-paper")
    assert (status, err) in ((0, ""), (4, ""))
    (line,) = out.splitlines()
    plan = json.loads(line)
    # The contract's field names and types (README, JSON output).
    assert plan["heat"] == "manganese"  # the file's name when the file gives no id
    assert plan["status"] == "optimal"
    assert isinstance(plan["total_cost"], float) and isinstance(plan["final_kg"], float)
    assert plan["violations"] == []
    assert all(isinstance(c, str) for c in plan["cautions"]) and plan["cautions"]
    (addition,) = plan["additions"]
    assert set(addition) >= {"material", "kg", "cost"}
    # The closed form x = W (c* - c0) / (r a - g c*) (g = r = 0.9 here), worked by hand:
    # 100 000 x 0.0030 / (0.9 x 0.78 - 0.9 x 0.0080) = 300 / 0.6948 = 431.78 kg; numbers unrounded.
    x = 100_000 * (0.0080 - 0.0050) / (0.9 * 0.78 - 0.9 * 0.0080)
    assert addition["material"] == "FeMn"
    assert addition["kg"] == pytest.approx(x, rel=1e-6)
    assert addition["cost"] == pytest.approx(1.4 * x, rel=1e-6)
    assert plan["total_cost"] == pytest.approx(1.4 * x, rel=1e-6)
    assert plan["final_kg"] == pytest.approx(100_000 + 0.9 * x, rel=1e-9)
    assert plan["predicted"]["Mn"] == pytest.approx(0.80, rel=1e-6)
    assert addition["kg"] != round(addition["kg"], 2)


def test_several_heats_as_json_lines_in_order_with_the_worst_exit(capsys: pytest.CaptureFixture[str],
                                                                  recipes: Path) -> None:
    status, out, err = solve(capsys, recipes, HEATS / "trim.toml", HEATS / "copper.toml",
                             HEATS / "manganese.toml", "--json")
    assert (status, err) == (3, "")
    plans = [json.loads(line) for line in out.splitlines()]
    assert [p["heat"] for p in plans] == ["T-trim", "T-copper", "manganese"]
    assert [p["status"] for p in plans] == ["optimal", "closest", "optimal"]


@pytest.mark.slow  # starts worker processes
def test_jobs_plans_in_processes_and_keeps_the_order_and_the_worst_exit(capsys: pytest.CaptureFixture[str],
                                                                       recipes: Path, tmp_path: Path) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text('grade = "Trim"\nbath_kg = 0\n[analysis]\nC = 0.4\n', encoding="utf-8")
    heats = [HEATS / "trim.toml", HEATS / "copper.toml", bad, HEATS / "manganese.toml"] * 5
    alone = solve(capsys, recipes, *heats, "--json")
    assert solve(capsys, recipes, *heats, "--json", "--jobs", "3") == alone
    assert alone[0] == 2 and len(alone[1].splitlines()) == len(heats)
    assert solve(capsys, recipes, *heats, "--jobs", "2") == solve(capsys, recipes, *heats)
    status, _, err = solve(capsys, tmp_path / "nowhere", *heats, "--jobs", "2")
    assert status == 2 and len(err.splitlines()) == 1 and "recipes folder not found" in err


def test_closest_plan_exits_3_with_the_reason(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    status, out, _ = solve(capsys, recipes, HEATS / "copper.toml", "--json")
    plan = json.loads(out)
    assert status == 3
    assert plan["status"] == "closest"
    (violation,) = plan["violations"]
    assert violation["element"] == "Cu" and violation["limit"] == "max"
    # By hand: the 1 000 kg of room dilutes 0.40 % Cu to at best 0.40 * 20 / 21 = 0.381 %; the closest
    # plan may keep up to 2 % more violation than that least one to save cost (PlanOptions).
    least = 0.40 * 20 / 21 - 0.30
    assert least * (1 - 1e-6) <= violation["by"] <= least * 1.03
    assert "only 1,000 kg of capacity is free" in violation["reason"]
    status, out, _ = solve(capsys, recipes, HEATS / "copper.toml")
    assert status == 3 and "Why the grade cannot be met" in out


def test_a_bad_heat_among_good_ones_exits_2_and_the_others_are_still_planned(
        capsys: pytest.CaptureFixture[str], recipes: Path, tmp_path: Path) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text('grade = "Trim"\nbath_kg = 0\n[analysis]\nC = 0.4\n', encoding="utf-8")
    status, out, err = solve(capsys, recipes, HEATS / "trim.toml", bad, HEATS / "copper.toml", "--json")
    assert status == 2
    lines = [json.loads(line) for line in out.splitlines()]
    assert [(p["heat"], p["status"]) for p in lines] == [("T-trim", "optimal"), ("bad", "error"), ("T-copper", "closest")]
    assert len(err.splitlines()) == 1 and "bad.toml" in err and "bath_kg" in err


def test_no_aim_gives_the_cheapest_plan_inside_the_windows(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    _, with_aim, _ = solve(capsys, recipes, HEATS / "trim.toml", "--json")
    _, without, _ = solve(capsys, recipes, HEATS / "trim.toml", "--json", "--no-aim", "--on-paper")
    aimed, cheapest = json.loads(with_aim), json.loads(without)
    assert cheapest["total_cost"] < aimed["total_cost"]
    # Without aims (and on paper) Mn stops at its minimum; with them it is pulled towards 0.85 %.
    assert cheapest["predicted"]["Mn"] == pytest.approx(0.80, rel=1e-6)
    assert aimed["predicted"]["Mn"] > 0.80 + 1e-3


def test_packs_are_whole_unless_continuous(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    _, whole, _ = solve(capsys, recipes, HEATS / "trim.toml", "--json", "--no-aim")
    _, loose, _ = solve(capsys, recipes, HEATS / "trim.toml", "--json", "--no-aim", "--continuous")
    carbon = {p: next(a for a in json.loads(out)["additions"] if a["material"] == "Carbon raiser")
              for p, out in (("whole", whole), ("loose", loose))}
    assert carbon["whole"]["kg"] % 25 == 0 and carbon["whole"]["packs"] == carbon["whole"]["kg"] / 25
    assert carbon["loose"]["packs"] is None and carbon["loose"]["kg"] % 25 != 0
    assert carbon["whole"]["kg"] >= carbon["loose"]["kg"]  # the least whole number of packs covers it


def test_the_built_in_recipe_book_plans_a_heat(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    heat = tmp_path / "kb.toml"
    heat.write_text('grade = "SAE 1045"\nbath_kg = 60000\ncapacity_kg = 65000\n'
                    '[analysis]\nC = 0.40\nSi = 0.20\nMn = 0.55\nP = 0.012\nS = 0.020\nCu = 0.15\n'
                    'Ni = 0.07\nCr = 0.08\nMo = 0.02\n', encoding="utf-8")
    status = main(["solve", str(heat), "--json"])
    plan = json.loads(capsys.readouterr().out)
    assert status == 0 and plan["status"] == "optimal"
    assert 0.60 <= plan["predicted"]["Mn"] <= 0.90 and 0.43 <= plan["predicted"]["C"] <= 0.50  # SAE J403 1045


@pytest.mark.slow  # meltfix solve in a pseudo-terminal, a process of its own
def test_nothing_but_the_plans_reaches_the_terminal() -> None:
    # HiGHS can write straight to file descriptor 1 (seen with HiGHS 1.12), under Python's sys.stdout, which would
    # corrupt a running screen; a separate process, started as the `meltfix` program is, catches that.
    # The demo heats (whole packs: integer solves) and three heats on which HiGHS 1.12 printed a debug
    # line while its MIP presolve was on.
    heats = sorted((ROOT / "demo" / "heats").glob("*.toml")) + sorted(HEATS.glob("highs_chatter_*.toml"))
    command = [sys.executable, "-m", "meltfix", "solve", *map(str, heats), "--json"]
    done = subprocess.run(command, capture_output=True, text=True, timeout=120)
    assert done.stderr == ""
    assert done.returncode in (0, 3)
    lines = done.stdout.splitlines()
    assert len(lines) == len(heats)
    assert all(json.loads(line)["status"] in ("optimal", "closest") for line in lines)


def test_a_reader_that_closes_the_pipe_first_stops_the_program_quietly() -> None:
    # `meltfix solve ... | head`: the reader is gone before the first line is written. Exit 141
    # (128 + SIGPIPE) is what a shell reports for a writer stopped that way (common practice).
    command = [sys.executable, "-m", "meltfix", "solve", str(ROOT / "demo" / "heats" / "KB-24101.toml"), "--json"]
    child = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    assert child.stdout is not None and child.stderr is not None
    child.stdout.close()
    stderr = child.stderr.read().decode()
    assert child.wait(timeout=60) == EXIT_PIPE_CLOSED
    assert stderr == ""


# --------------------------------------------------------------------------------------------
# Bad input: exit 2, one line on stderr naming the file and the field, no traceback

GOOD = """\
heat = "T-bad"
grade = "Trim"
bath_kg = 100000
capacity_kg = 104000

[analysis]
C = 0.38
Mn = 0.50
Cr = 0.10
Cu = 0.10
S = 0.010
"""

BAD_HEATS = {
    # kind: (file text, field named in the message)
    "bad TOML": (GOOD.replace("bath_kg = 100000", "bath_kg = = 100000"), "line 3"),
    "unknown grade": (GOOD.replace('"Trim"', '"No such grade"'), "grade"),
    "unknown element": (GOOD.replace("Cr = 0.10", "Xq = 0.10"), "analysis.Xq"),
    "negative value": (GOOD.replace("Mn = 0.50", "Mn = -0.50"), "analysis.Mn"),
    "NaN value": (GOOD.replace("Mn = 0.50", "Mn = nan"), "analysis.Mn"),
    "text for a number": (GOOD.replace("Mn = 0.50", 'Mn = "half"'), "analysis.Mn"),
    "bath weight zero": (GOOD.replace("bath_kg = 100000", "bath_kg = 0"), "bath_kg"),
    "bath weight infinite": (GOOD.replace("bath_kg = 100000", "bath_kg = inf"), "bath_kg"),
    "bath weight missing": (GOOD.replace("bath_kg = 100000\n", ""), "bath_kg"),
    "capacity below the bath": (GOOD.replace("capacity_kg = 104000", "capacity_kg = 90000"), "capacity_kg"),
    "analysis over 100 %": (GOOD.replace("Cr = 0.10", "Cr = 60.0\nNi = 45.0"), "analysis"),
    "missing [analysis]": (GOOD.split("[analysis]")[0], "analysis"),
    "lock of an unknown material": (GOOD + '\n[lock_kg]\n"FeXx" = 5\n', "lock_kg.FeXx"),
    "lock above the stock": (GOOD + '\n[lock_kg]\n"FeMn" = 6000\n', "lock_kg.FeMn"),
    "lock that overfills the vessel": (GOOD + '\n[lock_kg]\n"Clean iron" = 19000\n', "lock_kg"),
    "unknown key": (GOOD.replace("bath_kg", "bath_kgs", 1), "bath_kgs"),
    "iron listed": (GOOD.replace("Cr = 0.10", "Fe = 98.0"), "analysis.Fe"),
    "switch_off not a list": (GOOD.replace('grade = "Trim"', 'grade = "Trim"\nswitch_off = "FeMn"'), "switch_off"),
}


def assert_one_clear_line(err: str, file_name: str, field: str) -> None:
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert "Traceback" not in err
    assert file_name in lines[0] and field in lines[0], lines[0]


@pytest.mark.parametrize("kind", BAD_HEATS)
def test_bad_heat_file(kind: str, capsys: pytest.CaptureFixture[str], recipes: Path, tmp_path: Path) -> None:
    text, field = BAD_HEATS[kind]
    heat = tmp_path / "heat_in_question.toml"
    heat.write_text(text, encoding="utf-8")
    status, out, err = solve(capsys, recipes, heat)
    assert status == 2
    assert out == ""
    assert_one_clear_line(err, "heat_in_question.toml", field)


def test_missing_heat_file(capsys: pytest.CaptureFixture[str], recipes: Path, tmp_path: Path) -> None:
    status, out, err = solve(capsys, recipes, tmp_path / "nowhere.toml")
    assert (status, out) == (2, "")
    assert_one_clear_line(err, "nowhere.toml", "file not found")


def test_missing_recipes_folder(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    status = main(["solve", str(HEATS / "trim.toml"), "--recipes", str(tmp_path / "no_recipes")])
    err = capsys.readouterr().err
    assert status == 2
    assert_one_clear_line(err, "no_recipes", "recipes folder not found")


def test_bad_recipes_file(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    materials = recipes / "materials.toml"
    materials.write_text(MATERIALS.replace("price_per_kg = 1.4", 'price_per_kg = "cheap"'), encoding="utf-8")
    status, _, err = solve(capsys, recipes, HEATS / "trim.toml")
    assert status == 2
    assert_one_clear_line(err, "materials.toml", "material 'FeMn'.price_per_kg")


def test_bad_grade_file(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    (recipes / "grades" / "trim.toml").write_text(GRADE.replace("Mn = [0.80, 0.90]", "Mn = [0.90, 0.80]"),
                                                 encoding="utf-8")
    status, _, err = solve(capsys, recipes, HEATS / "trim.toml")
    assert status == 2
    assert_one_clear_line(err, "trim.toml", "window.Mn")


def test_bad_heat_with_json_still_prints_one_line_on_stderr(capsys: pytest.CaptureFixture[str], recipes: Path,
                                                            tmp_path: Path) -> None:
    heat = tmp_path / "nan.toml"
    heat.write_text(BAD_HEATS["NaN value"][0], encoding="utf-8")
    status, out, err = solve(capsys, recipes, heat, "--json")
    assert status == 2
    assert json.loads(out) == {"heat": "nan", "status": "error", "error": err.strip().removeprefix("meltfix: ")}
    assert_one_clear_line(err, "nan.toml", "analysis.Mn")
