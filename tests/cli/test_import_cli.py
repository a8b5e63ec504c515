"""`meltfix import` end to end through meltfix.cli.main: JSON shape (the import contract), tables, heat files, errors."""

from __future__ import annotations

import json
import tomllib
from collections.abc import Callable
from pathlib import Path

import pytest

from meltfix.base.paths import demo_dir
from meltfix.cli import main
from meltfix.shop.heat import load_heat
from meltfix.shop.recipes import load_recipes

ROOT = Path(__file__).resolve().parents[2]
DATA = ROOT / "tests" / "data" / "spectro"
DEMO = ROOT / "demo" / "spectro"


@pytest.fixture()
def recipes(tmp_path: Path, write_recipes: Callable[..., Path]) -> Path:
    """A small recipe book of our own, so the tests do not depend on the demo shop's settings."""
    return write_recipes(
        tmp_path / "recipes",
        '[[material]]\nname = "FeMn HC"\nprice_per_kg = 1.4\ncomposition = { Mn = 78.0, C = 7.0 }\n',
        {"s355j2.toml": 'name = "S355J2"\n[window]\nC = [0, 0.20]\nMn = [0, 1.60]\n',
         "trial.toml": 'name = "Trial"\n[window]\nC = [0.1, 0.3]\nMn = [0.5, 1.0]\n'})


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    status = main(["import", *argv])
    captured = capsys.readouterr()
    return status, captured.out, captured.err


def test_json_follows_the_contract(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    status, out, err = _run(capsys, str(DATA / "three_burns_outlier.csv"), "--json", "--recipes", str(recipes))
    assert (status, err) == (0, "")
    data = json.loads(out)
    (sample,) = data["samples"]
    assert sample["sample"] == "KB-24117-1"
    assert sample["burns"] == 3
    # Means worked by hand in tests/core/test_spectro.py.
    assert sample["analysis"] == pytest.approx({"C": 0.183333, "Si": 0.229667, "Mn": 0.823})
    assert [type(flag) for flag in sample["flags"]] == [str]
    assert "Mn: burn 3" in sample["flags"][0]


def test_json_ppm_converted_and_bounds_listed(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    status, out, _ = _run(capsys, str(DATA / "below_limit.csv"), "--json", "--recipes", str(recipes))
    sample = json.loads(out)["samples"][0]
    assert status == 0
    assert sample["analysis"]["B"] == pytest.approx(5e-4)  # "< 5 ppm" = 5e-4 wt % (1 ppm = 1e-4 wt %)
    assert sample["below_limit"] == ["S", "Ti", "B"]


def test_drop_flagged_counts_only_accepted_burns(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    status, out, _ = _run(capsys, str(DATA / "three_burns_outlier.csv"), "--json", "--drop-flagged",
                          "--recipes", str(recipes))
    sample = json.loads(out)["samples"][0]
    assert (status, sample["burns"], sample["left_out_burns"]) == (0, 2, ["3"])
    assert sample["analysis"]["Mn"] == pytest.approx(0.8135)


@pytest.mark.parametrize(("name", "where"), [
    ("negative_value.csv", "row 3, column 'Ti'"),
    ("unknown_element.csv", "header, column 'Xy'"),
    ("cp1252.csv", "line 1"),
    ("ragged_row.csv", "row 3"),
    ("empty.csv", "the file is empty"),
])
def test_bad_file_exits_2_with_one_line(capsys: pytest.CaptureFixture[str], recipes: Path, name: str,
                                        where: str) -> None:
    status, out, err = _run(capsys, str(DATA / name), "--json", "--recipes", str(recipes))
    assert status == 2
    assert out == ""
    assert err.count("\n") == 1 and err.startswith("meltfix: ")
    assert name in err and where in err
    assert "Traceback" not in err


def test_table_marks_flagged_cells_and_bounds(capsys: pytest.CaptureFixture[str], recipes: Path,
                                              monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("COLUMNS", "160")
    status, out, _ = _run(capsys, str(DATA / "three_burns_outlier.csv"), "--recipes", str(recipes))
    assert status == 0
    assert "Sample KB-24117-1" in out and "mean of 3" in out
    assert "0.842 !" in out  # Mn to three decimals, one more than its limits (meltfix.plan.numbers)
    assert "spark a fresh burn" in out
    status, out, _ = _run(capsys, str(DATA / "below_limit.csv"), "--recipes", str(recipes))
    assert "<0.0010" in out and "B ppm" in out and "<5.0" in out


def test_narrow_terminal_lists_one_element_per_row(capsys: pytest.CaptureFixture[str], recipes: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("COLUMNS", "200")  # --width wins over $COLUMNS
    export = str(demo_dir() / "spectro" / "KB-24117_ladle.csv")
    status, out, _ = _run(capsys, export, "--recipes", str(recipes), "--width", "80")
    assert status == 0
    lines = out.splitlines()
    assert max(len(line) for line in lines) <= 80
    assert "…" not in out  # no value cut short
    assert any(line.startswith("│ Mn ") and "1.421 !" in line for line in lines)  # the flagged burn, in its row
    status, wide, _ = _run(capsys, export, "--recipes", str(recipes), "--width", "200")
    assert status == 0 and "│ Burn " not in out and "Burn" in wide
    status, as_json, _ = _run(capsys, export, "--json", "--recipes", str(recipes), "--width", "80")
    assert status == 0 and json.loads(as_json)["samples"]  # --json is not laid out at all
    assert _run(capsys, export, "--recipes", str(recipes), "--width", "12")[0] == 2


def test_shop_layout_from_recipes(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    (recipes / "shop.toml").write_text(
        '[spectrometer]\nsample_column = "Probe"\nburn_column = "Funken"\ndecimal = ","\n'
        'ignore_columns = ["Zeit"]\n'
        '[spectrometer.columns]\nKohlenstoff = "C"\nSilizium = "Si"\nMangan = "Mn"\nStickstoff = "N"\n'
        '[spectrometer.units]\nStickstoff = "ppm"\n', encoding="utf-8")
    status, out, _ = _run(capsys, str(DATA / "shop_layout.csv"), "--json", "--recipes", str(recipes))
    assert status == 0
    assert json.loads(out)["samples"][0]["analysis"] == pytest.approx(
        {"C": 0.083, "Si": 0.013, "Mn": 0.414, "N": 0.00595})


def test_bad_spectrometer_settings_exit_2(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    (recipes / "shop.toml").write_text('[spectrometer]\nsample_colum = "Probe"\n', encoding="utf-8")
    status, _, err = _run(capsys, str(DATA / "bom_comma.csv"), "--recipes", str(recipes))
    assert status == 2 and "spectrometer.sample_colum" in err


def test_unknown_sample_is_bad_input(capsys: pytest.CaptureFixture[str], recipes: Path) -> None:
    status, _, err = _run(capsys, str(DATA / "bom_comma.csv"), "--sample", "KB-0", "--recipes", str(recipes))
    assert status == 2 and "--sample" in err and "KB-24117-1" in err


# ---------------------------------------------------------------------------------------------
# Heat files


def test_heat_out_writes_a_heat_the_planner_can_read(capsys: pytest.CaptureFixture[str], recipes: Path,
                                                     tmp_path: Path) -> None:
    heat_file = tmp_path / "KB-24117.toml"
    status, out, err = _run(capsys, str(DATA / "below_limit.csv"), "--json", "--recipes", str(recipes),
                            "--heat-out", str(heat_file), "--grade", "S355J2", "--bath-kg", "80000",
                            "--not-measured", "Mn")
    assert status == 0 and json.loads(out)["samples"]
    assert "wrote" in err
    raw = tomllib.loads(heat_file.read_text(encoding="utf-8"))
    assert (raw["heat"], raw["grade"], raw["bath_kg"]) == ("KB-24117-4", "S355J2", 80000.0)
    assert raw["analysis"]["S"] == "<0.001"
    heat = load_heat(heat_file, load_recipes(recipes))
    assert heat.analysis.below_limit == {"S", "Ti", "B"} and heat.not_measured == {"Mn"}
    assert dict(heat.analysis.pct) == pytest.approx(
        {"C": 0.173, "S": 0.001, "Ti": 0.0012, "B": 0.0005, "N": 0.0051})


def test_heat_out_takes_the_grade_column_and_the_chosen_sample(capsys: pytest.CaptureFixture[str], recipes: Path,
                                                               tmp_path: Path) -> None:
    heat_file = tmp_path / "heat.toml"
    status, _, _ = _run(capsys, str(DATA / "grade_and_heat_columns.csv"), "--recipes", str(recipes),
                        "--heat-out", str(heat_file), "--bath-kg", "60000", "--capacity-kg", "65000",
                        "--sample", "KB-24117-12")
    assert status == 0
    raw = tomllib.loads(heat_file.read_text(encoding="utf-8"))
    assert (raw["heat"], raw["grade"], raw["capacity_kg"]) == ("24117", "S355J2", 65000.0)


def test_heat_out_refuses_to_overwrite_without_force(capsys: pytest.CaptureFixture[str], recipes: Path,
                                                     tmp_path: Path) -> None:
    heat_file = tmp_path / "heat.toml"
    heat_file.write_text("# the metallurgist's own notes\n", encoding="utf-8")
    args = [str(DATA / "bom_comma.csv"), "--recipes", str(recipes), "--heat-out", str(heat_file),
            "--grade", "Trial", "--bath-kg", "50000"]
    status, _, err = _run(capsys, *args)
    assert status == 2 and "already exists" in err and "--force" in err
    assert heat_file.read_text(encoding="utf-8") == "# the metallurgist's own notes\n"
    status, _, _ = _run(capsys, *args, "--force")
    assert status == 0 and tomllib.loads(heat_file.read_text(encoding="utf-8"))["grade"] == "Trial"


@pytest.mark.parametrize(("extra", "words"), [
    (["--grade", "S355J2"], "--bath-kg"),
    (["--bath-kg", "50000"], "--grade"),  # bom_comma.csv has no grade column
    (["--grade", "S999", "--bath-kg", "50000"], "'S999' is not a grade"),
    (["--grade", "S355J2", "--bath-kg", "-5"], "must be above 0"),
])
def test_heat_out_needs_grade_and_bath(capsys: pytest.CaptureFixture[str], recipes: Path, tmp_path: Path,
                                       extra: list[str], words: str) -> None:
    heat_file = tmp_path / "heat.toml"
    status, _, err = _run(capsys, str(DATA / "bom_comma.csv"), "--recipes", str(recipes),
                          "--heat-out", str(heat_file), *extra)
    assert status == 2 and words in err
    assert not heat_file.exists()


# ---------------------------------------------------------------------------------------------
# The demo shop's exports, with the built-in recipes (whatever [spectrometer] layout they hold)


@pytest.mark.parametrize("name", sorted(p.name for p in DEMO.iterdir()) if DEMO.is_dir() else [])
def test_demo_exports_import_with_the_built_in_recipes(capsys: pytest.CaptureFixture[str], name: str) -> None:
    status, out, err = _run(capsys, str(DEMO / name), "--json")
    assert (status, err) == (0, "")
    samples = json.loads(out)["samples"]
    assert samples and all(s["sample"].startswith("KB-") and s["analysis"] for s in samples)


def test_demo_ladle_export_becomes_a_heat_the_solver_reads(capsys: pytest.CaptureFixture[str],
                                                           tmp_path: Path) -> None:
    heat_file = tmp_path / "KB-24117.toml"
    status, _, _ = _run(capsys, str(DEMO / "KB-24117_ladle.csv"), "--heat-out", str(heat_file),
                        "--bath-kg", "110000", "--heat", "KB-24117")
    assert status == 0
    status = main(["solve", str(heat_file), "--json"])
    plan = json.loads(capsys.readouterr().out)
    assert status in (0, 3) and plan["status"] in ("optimal", "closest")


def test_json_of_an_export_rejected_at_its_last_row_prints_nothing(capsys: pytest.CaptureFixture[str],
                                                                   recipes: Path, tmp_path: Path) -> None:
    # The samples are read and written one at a time, but a bad row at the end still rejects the
    # whole file: nothing half-imported reaches stdout.
    path = tmp_path / "export.csv"
    rows = "".join(f"KB-{n};1;0,{n:03d}\nKB-{n};2;0,{n:03d}\n" for n in range(1, 400))
    path.write_text("Sample;Burn;C\n" + rows + "KB-x;1;0,1;0,2\n", encoding="utf-8")
    status, out, err = _run(capsys, str(path), "--json", "--recipes", str(recipes))
    assert (status, out) == (2, "")
    assert "row 800" in err and err.count("\n") == 1


def test_sample_not_in_a_big_export_lists_a_few_ids(capsys: pytest.CaptureFixture[str], recipes: Path,
                                                    tmp_path: Path) -> None:
    path = tmp_path / "export.csv"
    path.write_text("Sample;C\n" + "".join(f"KB-{n};0,{n:03d}\n" for n in range(1, 100)), encoding="utf-8")
    status, _, err = _run(capsys, str(path), "--json", "--sample", "KB-0", "--recipes", str(recipes))
    assert status == 2
    assert "it holds: KB-1, KB-2," in err and "KB-20 and 79 more" in err
