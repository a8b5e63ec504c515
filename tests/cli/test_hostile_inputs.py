"""Hostile inputs across heat files, recipe books, exports, logbooks and the command line.

Every case must end the same way: exit status 2, exactly one line on stderr naming the field (or
the file) at fault, and no traceback anywhere. The cases are the slips and attacks a real shop
meets: a decimal point dropped (C 45 for 0.45), tonnes typed as kilograms, numbers of hundreds of
digits, TOML nested thousands deep, control characters and markup in ids, damaged logbook rows.
"""

from __future__ import annotations

import shutil
import sqlite3
from collections.abc import Callable
from datetime import datetime
from pathlib import Path

import pytest

from meltfix.base.paths import default_recipes_dir, demo_dir
from meltfix.cli import main
from meltfix.records.logbook import Logbook
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import load_recipes

HEAT = (demo_dir() / "heats" / "KB-24101.toml").read_text(encoding="utf-8")
HUGE = "9" * 400
DEEP = "x = " + "[" * 5000 + "]" * 5000 + "\n"


def heat_case(old: str, new: str) -> Callable[[Path], list[str]]:
    def make(folder: Path) -> list[str]:
        assert old in HEAT, old
        path = folder / "heat.toml"
        path.write_text(HEAT.replace(old, new, 1), encoding="utf-8")
        return ["solve", str(path)]
    return make


def heat_text(text: str) -> Callable[[Path], list[str]]:
    def make(folder: Path) -> list[str]:
        path = folder / "heat.toml"
        path.write_text(text, encoding="utf-8")
        return ["solve", str(path)]
    return make


def recipes_case(file: str, old: str, new: str) -> Callable[[Path], list[str]]:
    """The built-in recipe book, copied, with one edit; the demo heat planned against it."""
    def make(folder: Path) -> list[str]:
        book = folder / "recipes"
        shutil.copytree(default_recipes_dir(), book)
        target = book / file
        text = target.read_text(encoding="utf-8")
        assert old in text, (file, old)
        target.write_text(text.replace(old, new, 1), encoding="utf-8")
        heat = folder / "heat.toml"
        heat.write_text(HEAT, encoding="utf-8")
        return ["solve", str(heat), "--recipes", str(book)]
    return make


EXPORT = "Sample;Burn;C;Si;Mn;P;S;Cr;Ni;Mo;Cu\n{id};1;0.40;0.18;0.52;0.014;0.022;0.09;0.08;0.02;0.16\n" \
         "{id};2;0.41;0.18;0.53;0.014;0.022;0.09;0.08;0.02;0.16\n"


def export_case(sample_id: str = "KB-1", *extra: str, body: str | None = None) -> Callable[[Path], list[str]]:
    def make(folder: Path) -> list[str]:
        path = folder / "export.csv"
        path.write_text(body if body is not None else EXPORT.format(id=sample_id), encoding="utf-8")
        return ["import", str(path), *[a.replace("{folder}", str(folder)) for a in extra]]
    return make


HEAT_OUT = ("--heat-out", "{folder}/out.toml", "--grade", "SAE 1045", "--bath-kg", "60000")


def logbook_case(sql: str, *argv: str) -> Callable[[Path], list[str]]:
    """A small logbook with one planned heat, damaged by ``sql``."""
    def make(folder: Path) -> list[str]:
        from meltfix.plan.planner import Planner

        path = folder / "log.sqlite"
        book = load_recipes()
        analysis = Analysis({"C": 0.40, "Si": 0.18, "Mn": 0.52, "P": 0.014, "S": 0.022, "Cr": 0.09, "Ni": 0.08,
                             "Mo": 0.02, "Cu": 0.16})
        heat = Heat("KB-7", "SAE 1045", 60_000.0, analysis)
        when = datetime(2026, 3, 10, 8, 0)
        with Logbook(path, book) as logbook:
            logbook.record_sample("KB-7", "S1", analysis, when=when)
            logbook.record_plan(heat, Planner(book).plan(heat), when)
        with sqlite3.connect(path) as db:
            db.execute(sql)
        db.close()
        return [a.replace("{log}", str(path)).replace("{folder}", str(folder)) for a in argv]
    return make


def argv_case(*argv: str) -> Callable[[Path], list[str]]:
    def make(folder: Path) -> list[str]:
        return [a.replace("{folder}", str(folder)) for a in argv]
    return make


# case name -> (builds the command line in a folder, texts the one line must hold)
CASES: dict[str, tuple[Callable[[Path], list[str]], tuple[str, ...]]] = {
    # -- heat files: implausible values, with the likely slip named --------------------------------
    "C typed without its point": (heat_case("C = 0.40", "C = 45"), ("analysis.C", "at most 5 %", "0.45?")),
    "C and Mn both absurd": (heat_case("C = 0.40\nSi = 0.18\nMn = 0.52", "C = 38\nSi = 0.18\nMn = 52"),
                             ("analysis.C",)),
    "S typed without its point": (heat_case("S = 0.022", "S = 2.2"), ("analysis.S", "0.022?")),
    "N in ppm typed as wt %": (heat_case('N = "68 ppm"', "N = 68"), ("analysis.N", "ppm")),
    "bath in tonnes": (heat_case("bath_kg = 60000", "bath_kg = 60"), ("bath_kg", "5,000 kg", "tonnes?")),
    "bath in grams": (heat_case("bath_kg = 60000\ncapacity_kg = 65000", "bath_kg = 60000000"),
                      ("bath_kg", "150,000 kg", "grams?")),
    "bath 1e15": (heat_case("bath_kg = 60000\ncapacity_kg = 65000", "bath_kg = 1e15"), ("bath_kg",)),
    "bath 1e308 blames the bath": (heat_case("bath_kg = 60000\ncapacity_kg = 65000", "bath_kg = 1e308"),
                                   ("bath_kg",)),
    "bath of 400 digits": (heat_case("bath_kg = 60000", f"bath_kg = {HUGE}"), ("bath_kg", "too large")),
    "bath infinite": (heat_case("bath_kg = 60000", "bath_kg = inf"), ("bath_kg",)),
    "capacity 1e308": (heat_case("capacity_kg = 65000", "capacity_kg = 1e308"), ("capacity_kg",)),
    "temperature of 400 digits": (heat_case("temperature_c = 1595", f"temperature_c = {HUGE}"), ("temperature_c",)),
    "temperature overflowing to inf": (heat_case("temperature_c = 1595", "temperature_c = 1e400"), ("temperature_c",)),
    "oxygen 1e308": (heat_case("temperature_c = 1595", "temperature_c = 1595\ndissolved_o_ppm = 1e308"),
                     ("dissolved_o_ppm",)),
    "Mn of 400 digits": (heat_case("Mn = 0.52", f"Mn = {HUGE}"), ("analysis.Mn",)),
    "Mn as a 1e999 text": (heat_case("Mn = 0.52", 'Mn = "1e999"'), ("analysis.Mn",)),
    "price override 1e308": (heat_case("[analysis]", '[price_per_kg]\n"HC FeMn" = 1e308\n\n[analysis]'),
                             ("price_per_kg.HC FeMn", "too large")),
    "price override of 400 digits": (heat_case("[analysis]", f'[price_per_kg]\n"HC FeMn" = {HUGE}\n\n[analysis]'),
                                     ("price_per_kg.HC FeMn",)),
    "stock override 1e300": (heat_case("[analysis]", '[stock_kg]\n"HC FeMn" = 1e300\n\n[analysis]'),
                             ("stock_kg.HC FeMn",)),
    "lock of 400 digits": (heat_case("[analysis]", f'[lock_kg]\n"HC FeMn" = {HUGE}\n\n[analysis]'),
                           ("lock_kg.HC FeMn",)),
    "drop limit 1e308": (heat_case("temperature_c = 1595", "temperature_c = 1595\nmax_temp_drop_c = 1e308"),
                         ("max_temp_drop_c",)),
    # -- heat files: unmeasured is not zero ------------------------------------------------------
    "Cu missing": (heat_case("Cu = 0.16\n", ""), ("analysis", "Cu not measured", "not_measured")),
    "Cr and Ni missing": (heat_case("Cr = 0.09\nNi = 0.08\n", ""), ("analysis", "Cr, Ni not measured")),
    "not_measured not a list": (heat_case("temperature_c = 1595", 'temperature_c = 1595\nnot_measured = "Sn"'),
                                ("not_measured",)),
    "not_measured not a symbol": (heat_case("temperature_c = 1595", 'temperature_c = 1595\nnot_measured = ["Xq"]'),
                                  ("not_measured", "Xq")),
    "not_measured and measured": (heat_case("temperature_c = 1595", 'temperature_c = 1595\nnot_measured = ["Cu"]'),
                                  ("not_measured", "Cu")),
    "not_measured misspelt": (heat_case("temperature_c = 1595", 'temperature_c = 1595\nnot_measurd = ["Sn"]'),
                              ("not_measurd", "unknown key")),
    # -- heat files: text that is not plain text -------------------------------------------------
    "heat id with an escape sequence": (heat_case('heat = "KB-24101"', 'heat = "KB\\u001b[2J\\u001b]52;c;aGk=\\u0007"'),
                                        ("heat", "control character")),
    "heat id with a bidi override": (heat_case('heat = "KB-24101"', 'heat = "KB-\\u202e10142"'),
                                     ("heat", "control character")),
    "heat id of 10,000 characters": (heat_case('heat = "KB-24101"', f'heat = "{"K" * 10_000}"'),
                                     ("heat", "10,000 characters")),
    "grade with a newline": (heat_case('grade = "SAE 1045"', 'grade = "SAE\\n1045"'), ("grade", "control character")),
    "TOML nested 5,000 deep": (heat_text(DEEP), ("heat.toml", "nested too deep")),
    "bare decimal comma": (heat_case("C = 0.40", "C = 0,40"), ("heat.toml", "decimal comma", "0.45")),
    "unknown grade": (heat_case('grade = "SAE 1045"', 'grade = "SAE 1045 [bold]"'), ("grade", "unknown grade")),
    "heat file is a folder": (argv_case("solve", "{folder}"), ("is a folder",)),
    "heat file missing": (argv_case("solve", "{folder}/none.toml"), ("none.toml", "file not found")),
    # -- recipe books ----------------------------------------------------------------------------
    "aim_penalty 1e308": (recipes_case("shop.toml", "aim_penalty = 2.0", "aim_penalty = 1e308"),
                          ("shop.toml", "aim_penalty", "too large")),
    "aim_penalty of 400 digits": (recipes_case("shop.toml", "aim_penalty = 2.0", f"aim_penalty = {HUGE}"),
                                  ("aim_penalty",)),
    "aim_penalty with a decimal comma": (recipes_case("shop.toml", "aim_penalty = 2.0", "aim_penalty = 2,0"),
                                         ("shop.toml", "decimal comma")),
    "shop.toml nested too deep": (recipes_case("shop.toml", "currency = ", DEEP + "currency = "),
                                  ("shop.toml", "nested too deep")),
    "bath range of one number": (recipes_case("shop.toml", "bath_kg_range = [5000, 150000]", "bath_kg_range = [5000]"),
                                 ("bath_kg_range",)),
    "bath range upside down": (recipes_case("shop.toml", "bath_kg_range = [5000, 150000]",
                                            "bath_kg_range = [150000, 5000]"), ("bath_kg_range", "not below")),
    "bath range 1e308": (recipes_case("shop.toml", "bath_kg_range = [5000, 150000]", "bath_kg_range = [5000, 1e308]"),
                         ("bath_kg_range", "too large")),
    "plausible max of no element": (recipes_case("shop.toml", "[spectrometer]", "[plausible_max_pct]\nXq = 1\n\n[spectrometer]"),
                                    ("plausible_max_pct.Xq",)),
    "plausible max of zero": (recipes_case("shop.toml", "[spectrometer]", "[plausible_max_pct]\nC = 0\n\n[spectrometer]"),
                              ("plausible_max_pct.C",)),
    "plausible max above 100": (recipes_case("shop.toml", "[spectrometer]",
                                             "[plausible_max_pct]\nC = 300\n\n[spectrometer]"), ("plausible_max_pct.C",)),
    "material price 1e308": (recipes_case("materials.toml", "price_per_kg = 1.35", "price_per_kg = 1e308"),
                             ("materials.toml", "price_per_kg", "too large")),
    "material stock of 400 digits": (recipes_case("materials.toml", "stock_kg = 6000", f"stock_kg = {HUGE}"),
                                     ("stock_kg",)),
    "material name with an escape": (recipes_case("materials.toml", 'name = "HC FeMn"', 'name = "HC \\u001b[31mFeMn"'),
                                     ("materials.toml", "name", "control character")),
    "material notes with an escape": (recipes_case("materials.toml", 'notes = "', 'notes = "\\u001b]52;c;aGk=\\u0007'),
                                      ("materials.toml", "notes", "control character")),
    "composition of 400 digits": (recipes_case("materials.toml", "composition = { Mn = 79.0",
                                               f"composition = {{ Mn = {HUGE}"), ("composition.Mn",)),
    "grade name of 10,000 characters": (recipes_case("grades/sae-1045.toml", 'name = "SAE 1045"',
                                                     f'name = "{"G" * 10_000}"'), ("sae-1045.toml", "name")),
    "grade window 1e308": (recipes_case("grades/sae-1045.toml", "Mo = [0, 0.06]", "Mo = [0, 1e308]"),
                           ("window.Mo",)),
    # -- spectrometer exports --------------------------------------------------------------------
    "heat-out from a sample id with a control character": (export_case("KB\x1b[2J-1", *HEAT_OUT),
                                                           ("--heat", "control character")),
    "heat-out from a sample id of 10,000 characters": (export_case("K" * 10_000, *HEAT_OUT), ("--heat",)),
    "heat-out lacking an element the grade limits": (
        export_case("KB-1", *HEAT_OUT, body=EXPORT.format(id="KB-1").replace(";Cu", "").replace(";0.16", "")),
        ("--not-measured", "Cu")),
    "heat-out to a folder": (export_case("KB-1", "--heat-out", "{folder}", "--grade", "SAE 1045", "--bath-kg", "60000",
                                         "--force"), ("is a folder",)),
    "heat-out with an unknown symbol to skip": (export_case("KB-1", *HEAT_OUT, "--not-measured", "Xq"),
                                                ("--not-measured", "Xq")),
    "heat-out with an implausible bath": (export_case("KB-1", "--heat-out", "{folder}/o.toml", "--grade", "SAE 1045",
                                                      "--bath-kg", "1e308"), ("bath_kg",)),
    "export cell of 1e999": (export_case(body=EXPORT.format(id="KB-1").replace("0.52", "1e999")), ("Mn",)),
    "export is a folder": (argv_case("import", "{folder}"), ("is a folder",)),
    # -- logbooks --------------------------------------------------------------------------------
    "report CSV into a folder": (logbook_case("SELECT 1", "report", "--logbook", "{log}", "--csv", "{folder}"),
                                 ("is a folder",)),
    "report over a heat started 'yesterday'": (logbook_case("UPDATE heat SET started_at = 'yesterday'", "report",
                                                            "--logbook", "{log}"), ("KB-7", "started_at")),
    "replay of a plan that is not JSON": (logbook_case("UPDATE plan SET result = '{not json'", "replay", "--logbook",
                                                       "{log}", "--heat", "KB-7"), ("KB-7",)),
    "replay of a heat file that is not TOML": (logbook_case("UPDATE plan SET heat_toml = 'x = = 1'", "replay",
                                                            "--logbook", "{log}", "--heat", "KB-7"), ("KB-7", "heat_toml")),
    "replay of a sample taken 'yesterday'": (logbook_case("UPDATE sample SET taken_at = 'yesterday'", "replay",
                                                          "--logbook", "{log}", "--heat", "KB-7"), ("KB-7", "taken_at")),
    "replay of an analysis that is not JSON": (logbook_case("UPDATE sample SET analysis = '[1'", "replay", "--logbook",
                                                            "{log}", "--heat", "KB-7"), ("KB-7", "sample.analysis")),
    "report over a bath weight that is text": (logbook_case("UPDATE heat SET bath_kg = 'heavy'", "report", "--logbook",
                                                            "{log}"), ("KB-7", "bath_kg")),
    # -- the command line ------------------------------------------------------------------------
    "odds with a negative seed": (argv_case("solve", str(demo_dir() / "heats" / "KB-24101.toml"), "--seed", "-1"),
                                  ("--seed",)),
    "an option that does not exist": (argv_case("solve", "h.toml", "--odds"), ("unrecognized arguments: --odds",)),
    "a seed that is not a number": (argv_case("solve", "h.toml", "--seed", "x"), ("--seed", "'x'")),
    "two logbooks at once": (argv_case("report", "--demo", "--logbook", "x.sqlite"), ("--demo",)),
    "draws of zero": (argv_case("solve", str(demo_dir() / "heats" / "KB-24101.toml"), "--draws", "0"), ("--draws",)),
    "sure above 1": (argv_case("solve", str(demo_dir() / "heats" / "KB-24101.toml"), "--sure", "2"), ("--sure",)),
    "mistyped solve": (argv_case("sovle", "h.toml"), ("sovle", "did you mean 'solve'")),
    "mistyped report": (argv_case("reprot"), ("reprot", "did you mean 'report'")),
    "mistyped recoveries": (argv_case("recoveris", "--demo"), ("did you mean 'recoveries'",)),
    "not a command at all": (argv_case("frobnicate"), ("frobnicate", "not a command")),
}


@pytest.mark.parametrize("case", CASES)
def test_hostile_input_is_one_line_and_exit_2(case: str, tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("MELTFIX_LOGBOOK", str(tmp_path / "never.sqlite"))
    build, named = CASES[case]
    argv = build(tmp_path)
    capsys.readouterr()
    status = main(argv)
    captured = capsys.readouterr()
    assert status == 2, (captured.out, captured.err)
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert "Traceback" not in captured.err + captured.out
    assert "\x1b" not in captured.err and "\x07" not in captured.err
    for text in named:
        assert text in lines[0], lines[0]


def test_the_matrix_is_large_enough() -> None:
    assert len(CASES) >= 60


# --------------------------------------------------------------------------------------------
# What is not an error: declared gaps, markup-like ids, formula-like ids


def test_a_declared_gap_plans_with_its_limits_unchecked_and_out_of_the_odds(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "heat.toml"
    path.write_text(HEAT.replace("Cu = 0.16\n", "").replace("temperature_c = 1595",
                                                            'temperature_c = 1595\nnot_measured = ["cu"]'),
                    encoding="utf-8")
    assert main(["solve", str(path), "--json"]) in (0, 4)
    import json

    plan = json.loads(capsys.readouterr().out)
    assert plan["cautions"][0].startswith("NOT MEASURED: Cu")
    assert "Cu" not in plan["predicted"] or all(v["element"] != "Cu" for v in plan["violations"])
    assert not any(label.startswith("Cu") for label in plan["odds"]["limits"])


def test_an_id_that_looks_like_markup_is_printed_as_it_is(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "heat.toml"
    path.write_text(HEAT.replace('heat = "KB-24101"', 'heat = "KB-1 [/] [bold red]x"'), encoding="utf-8")
    assert main(["solve", str(path)]) == 0
    assert "KB-1 [/] [bold red]x" in capsys.readouterr().out


def test_report_csv_cells_never_run_as_formulas(tmp_path: Path) -> None:
    # OWASP, "CSV Injection" (owasp.org/www-community/attacks/CSV_Injection): prefix a cell that starts
    # with =, +, -, @, tab or carriage return with a single quote so a spreadsheet shows it as text.
    from meltfix.base.outputs import csv_cell

    assert [csv_cell(v) for v in ("=1+2", "+1+2", "-x", "@SUM(A1)", "\tx", "\rx", "KB-1", "-5.2", 3.5)] == [
        "'=1+2", "'+1+2", "'-x", "'@SUM(A1)", "'\tx", "'\rx", "KB-1", "-5.2", 3.5]
    argv = logbook_case("UPDATE heat SET heat_id = '=HYPERLINK(\"http://x\")' WHERE heat_id = 'KB-7'")(tmp_path)
    assert argv == []
    target = tmp_path / "week.csv"
    assert main(["report", "--logbook", str(tmp_path / "log.sqlite"), "--csv", str(target)]) == 0
    text = target.read_text(encoding="utf-8")
    assert "'=HYPERLINK" in text and "\n=HYPERLINK" not in text and ",=HYPERLINK" not in text
