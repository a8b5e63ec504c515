"""Reading spectrometer exports: real-world quirks, the repeatability check and the averaging rules.

Each fixture under tests/data/spectro/ is one quirk an instrument or a spreadsheet produces; the
tables below give the outcome each must have (values, or the one error naming row and column).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from meltfix.base.errors import InputError
from meltfix.readers.export_layout import ExportLayout
from meltfix.readers.spectro import parse_export, read_export
from meltfix.shop.repeatability import RepeatabilityCurve, default_curve
from meltfix.shop.settings import ShopSettings

DATA = Path(__file__).resolve().parents[1] / "data" / "spectro"

# Parts per million by mass are 1e-6 of the mass, i.e. 1e-4 wt % (definition of ppm as a mass
# fraction); every ppm expectation below is written as ppm * 1e-4 to show that conversion.
PPM = 1e-4

# fixture -> {sample: {element: wt %}}
READS: dict[str, dict[str, dict[str, float]]] = {
    # A UTF-8 byte-order mark in front of "Sample" must not hide the sample column.
    "bom_comma.csv": {"KB-24117-1": {"C": 0.183, "Si": 0.230, "Mn": 0.814, "P": 0.012, "S": 0.0085}},
    "semicolon_decimal_comma.csv": {"KB-24117-2": {"C": 0.196, "Si": 0.242, "Mn": 1.105}},
    "tab_separated.tsv": {"KB-24118-1": {"C": 0.400, "Mn": 0.750, "Cr": 0.950, "Mo": 0.180}},
    "ppm_columns.csv": {"KB-24117-3": {"C": 0.18, "N": 46 * PPM, "B": 23 * PPM, "O": 31 * PPM}},
    "blank_cells.csv": {"KB-24117-5": {"C": 0.212, "Si": 0.192, "Mn": 0.653, "Cu": 0.222}},
    # "C %", "Si (%)", "Mn[%]", "%P", "S wt%", "N [ppm]", "Al [mg/kg]" (mg/kg is ppm by mass).
    "header_units.csv": {"KB-24118-2": {"C": 0.41, "Si": 0.22, "Mn": 0.78, "P": 0.011, "S": 0.018,
                                        "N": 62 * PPM, "Al": 300 * PPM}},
    "sep_line.csv": {"KB-24118-4": {"C": 0.30, "Mn": 0.705}},
    "preamble_and_mean_row.csv": {"KB-24118-5": {"C": 0.45, "Si": 0.25, "Mn": 0.71}},
    "utf16_tab.txt": {"KB-24118-11": {"C": 0.25, "Mn": 0.61}},
    "crlf_trailing_separator.csv": {"KB-24118-7": {"C": 0.21, "Mn": 0.555}},
    "quoted_decimal_comma.csv": {"KB-24118-8": {"C": 0.15, "Mn": 0.61}},
    "grade_and_heat_columns.csv": {"KB-24117-12": {"C": 0.15, "Mn": 1.385}},
    "below_limit.csv": {"KB-24117-4": {"C": 0.173, "S": 0.001, "Ti": 0.0012, "B": 5 * PPM, "N": 0.0051}},
    # Appended sessions: the header again, then a fresh spark of the same sample (burn number 1 again).
    "repeated_header.csv": {"KB-24119-3": {"C": 0.935 / 3, "Mn": 0.705}},
}

# fixture -> (field named by the error, words of the message)
REJECTS: dict[str, tuple[str, str]] = {
    "unknown_element.csv": ("header, column 'Xy'", "not a chemical element symbol"),
    "negative_value.csv": ("row 3, column 'Ti'", "negative"),
    "over_100.csv": ("row 3, column 'Cr'", "above 100 %"),
    "all_blank_sample.csv": ("sample 'KB-24117-9' (rows 4–5)", "no usable burn"),
    "cp1252.csv": ("line 1", "byte 0xB0 is not UTF-8 text"),
    "empty.csv": ("", "the file is empty"),
    "ragged_row.csv": ("row 3", "ragged row"),
    "mixed_decimal.csv": ("row 3, column 'C'", "decimal point but row 2, column 'C' has a decimal comma"),
    "no_sample_column.csv": ("header", "no sample column found"),
    "above_range.csv": ("row 3, column 'Mn'", "above the instrument's calibrated range"),
    "ppm_as_percent.csv": ("row 2, column 'N'", "not credible"),
    "header_only.csv": ("row 1", "not followed by any burn"),
    "duplicate_element.csv": ("header, column 'Mn %'", "already read from column 'Mn'"),
    "workbook_saved_as_csv.csv": ("", "spreadsheet workbook"),
    "shop_layout.csv": ("header", "no sample column found"),  # read without the shop's layout
}


@pytest.mark.parametrize("name", sorted(READS))
def test_quirky_exports_read_to_the_expected_means(name: str) -> None:
    result = read_export(DATA / name)
    assert {s.sample_id: dict(s.analysis.pct) for s in result.samples}.keys() == READS[name].keys()
    for sample in result.samples:
        expected = READS[name][sample.sample_id]
        assert sample.analysis.pct.keys() == expected.keys()
        for symbol, pct in expected.items():
            assert sample.analysis.pct[symbol] == pytest.approx(pct, rel=1e-9), symbol


@pytest.mark.parametrize("name", sorted(REJECTS))
def test_bad_exports_are_rejected_with_one_error_naming_row_and_column(name: str) -> None:
    field, words = REJECTS[name]
    with pytest.raises(InputError) as caught:
        read_export(DATA / name)
    assert caught.value.field == field
    assert words in caught.value.message
    assert name in str(caught.value) and "\n" not in str(caught.value)


def test_there_are_at_least_fifteen_quirk_fixtures_and_each_has_an_outcome() -> None:
    files = {p.name for p in DATA.iterdir() if not p.name.startswith(".")}
    covered = set(READS) | set(REJECTS) | {"three_burns_outlier.csv", "two_burns_disagree.csv"}
    assert files == covered
    assert len(files) >= 15


# ---------------------------------------------------------------------------------------------
# Detection limits


def test_below_limit_values_stay_upper_bounds() -> None:
    sample = read_export(DATA / "below_limit.csv").samples[0]
    # S: "<0.001" twice -> "<0.001". B: "< 5 ppm" and "<5" in a ppm column -> "<5 ppm".
    # Ti: "< 0.001" and 0.0012 -> max(0.001, mean of the measured 0.0012) = "<0.0012", never below a
    # measured burn. C and N are measured in both burns: plain means.
    assert sample.analysis.below_limit == {"S", "B", "Ti"}
    assert not sample.flags


def test_a_burn_below_the_limit_while_the_others_read_well_above_it_is_flagged() -> None:
    body = "Sample,S\nKB-1,0.012\nKB-1,0.011\nKB-1,<0.001\n"
    sample = parse_export(body, "x.csv").samples[0]
    # The measured burns average 0.0115; the bound 0.001 is 0.0105 below, far beyond r = 0.002.
    assert sample.analysis.pct["S"] == pytest.approx(0.0115)
    assert sample.analysis.below_limit == {"S"}
    assert any("S: burn 3 reads below 0.0010 %" in flag for flag in sample.flags)
    assert sample.burns[2].disputed_in == {"S"}


# ---------------------------------------------------------------------------------------------
# Repeatability check and averaging, worked by hand


def test_three_burns_one_outlier_worked_by_hand() -> None:
    # three_burns_outlier.csv, sample KB-24117-1:
    #   burn   C      Si     Mn
    #   1      0.182  0.231  0.812
    #   2      0.185  0.228  0.815
    #   3      0.183  0.230  0.842
    # Mn, distance of each burn from the median of the other two:
    #   burn 1: |0.812 - (0.815+0.842)/2 = 0.8285| = 0.0165
    #   burn 2: |0.815 - (0.812+0.842)/2 = 0.8270| = 0.0120
    #   burn 3: |0.842 - (0.812+0.815)/2 = 0.8135| = 0.0285  <- farthest
    #   r(0.8135) = max(0.002, 0.018*sqrt(0.8135) = 0.018*0.90194 = 0.016235, 0.01*0.8135) = 0.016235
    #   0.0285 > 0.016235 -> burn 3 flagged for Mn.
    # C: distances 0.0020, 0.0025, 0.0005; farthest burn 2 at 0.0025,
    #   r(0.1825) = max(0.002, 0.018*0.42720 = 0.00769) = 0.00769 -> fine.
    # Si: distances 0.0020, 0.0025, 0.0005; r(0.2305) = 0.018*0.48010 = 0.00864 -> fine.
    # Mean kept (burn 3 stays unless asked): C 0.550/3 = 0.183333, Si 0.689/3 = 0.229667, Mn 2.469/3 = 0.823.
    # Burn 3 dropped: C 0.367/2 = 0.1835, Si 0.459/2 = 0.2295, Mn 1.627/2 = 0.8135.
    kept = read_export(DATA / "three_burns_outlier.csv").samples[0]
    assert [b.outlier_in for b in kept.burns] == [frozenset(), frozenset(), frozenset({"Mn"})]
    assert all(b.accepted for b in kept.burns)
    assert dict(kept.analysis.pct) == pytest.approx({"C": 0.550 / 3, "Si": 0.689 / 3, "Mn": 0.823})
    # Written as every output writes a Mn content (three decimals): 0.0285 (0.02849... in binary) -> 0.028.
    assert kept.flags == ("Mn: burn 3 reads 0.842 %, 0.028 % from the others' median 0.814 % "
                          "(repeatability limit 0.016 %); spark a fresh burn",)

    dropped = read_export(DATA / "three_burns_outlier.csv", drop_flagged=True).samples[0]
    assert [b.accepted for b in dropped.burns] == [True, True, False]
    assert len(dropped.accepted_burns) == 2
    assert dict(dropped.analysis.pct) == pytest.approx({"C": 0.1835, "Si": 0.2295, "Mn": 0.8135})
    assert "burn 3 left out of the mean (flagged in Mn)" in dropped.flags


def test_two_burns_that_disagree_are_both_flagged_and_neither_can_be_dropped() -> None:
    # C: |0.210 - 0.230| = 0.020 > r(0.220) = 0.018*sqrt(0.22) = 0.008443 -> the pair disagrees.
    # Mn: |0.905 - 0.910| = 0.005 < r(0.9075) = 0.018*0.95263 = 0.017147 -> fine.
    for drop in (False, True):
        sample = read_export(DATA / "two_burns_disagree.csv", drop_flagged=drop).samples[0]
        assert [b.disputed_in for b in sample.burns] == [frozenset({"C"}), frozenset({"C"})]
        assert all(b.accepted for b in sample.burns)
        assert sample.analysis.pct["C"] == pytest.approx(0.220)
        assert sample.flags == ("C: burns 1 and 2 differ by 0.020 % (repeatability limit 0.008 %); "
                                "spark a third burn to tell which is wrong",)


def test_three_burns_with_two_equally_far_cannot_be_pinned_on_one() -> None:
    sample = parse_export("Sample,C\nKB-1,0.10\nKB-1,0.20\nKB-1,0.30\n", "x.csv", drop_flagged=True).samples[0]
    assert [b.disputed_in for b in sample.burns] == [{"C"}, frozenset(), {"C"}]
    assert all(b.accepted for b in sample.burns)
    assert "equally far" in sample.flags[0]


def test_every_burn_flagged_and_dropped_is_an_error_not_an_empty_sample() -> None:
    body = ("Sample,C,Si,Mn\n"
            "KB-1,0.30,0.20,0.80\n"
            "KB-1,0.18,0.25,0.80\n"
            "KB-1,0.18,0.20,0.80\n"
            "KB-1,0.18,0.20,0.60\n")
    # C singles out burn 1, Si burn 2, Mn burn 4: dropping leaves burn 3 alone, which is allowed.
    sample = parse_export(body, "x.csv", drop_flagged=True).samples[0]
    assert [b.accepted for b in sample.burns] == [False, False, True, False]
    assert "only one burn: repeatability not checked; spark a second burn" in sample.flags
    # Three burns, each the outlier of one element: nothing would be left.
    with pytest.raises(InputError, match="every burn was flagged") as caught:
        parse_export("Sample,C,Si,Mn\nKB-1,0.30,0.20,0.80\nKB-1,0.18,0.25,0.80\nKB-1,0.18,0.20,0.60\n",
                     "x.csv", drop_flagged=True)
    assert caught.value.field == "sample 'KB-1' (rows 2–4)"


def test_a_blank_burn_is_not_counted_and_the_mean_uses_the_cells_there_are() -> None:
    sample = read_export(DATA / "blank_cells.csv").samples[0]
    assert len(sample.accepted_burns) == 3
    assert "Si: read in 2 of 3 burns; the mean uses those" in sample.flags
    blank = parse_export("Sample,C\nKB-1,0.2\nKB-1,\nKB-1,0.2\n", "x.csv").samples[0]
    assert [b.accepted for b in blank.burns] == [True, False, True]
    assert "burn 2 (row 3) has no values and is not counted" in blank.flags


def test_single_burn_is_kept_with_a_flag() -> None:
    sample = parse_export("Sample,C\nKB-1,0.2\n", "x.csv").samples[0]
    assert sample.flags == ("only one burn: repeatability not checked; spark a second burn",)


def test_repeatability_curve_values() -> None:
    # r = max(floor, 0.018*sqrt(c), 0.01*c), common practice (see meltfix.shop.repeatability).
    assert default_curve("C").limit_pct(0.2) == pytest.approx(0.018 * math.sqrt(0.2))
    assert default_curve("Cr").limit_pct(18.0) == pytest.approx(0.18)
    assert default_curve("S").limit_pct(0.0001) == pytest.approx(0.001)
    assert default_curve("B").limit_pct(20 * PPM) == pytest.approx(0.008 * math.sqrt(0.002))


@pytest.mark.parametrize(("symbol", "lower_limit_pct"), [
    # ASTM E415-17 §1.1 scope table, lower ends of the quantitative ranges (mass %).
    ("C", 0.02), ("S", 0.001), ("P", 0.006), ("B", 0.0004), ("N", 0.01), ("Al", 0.006), ("Ti", 0.001),
    ("Nb", 0.003), ("V", 0.003), ("Cu", 0.006), ("Ni", 0.006), ("Cr", 0.007), ("Mo", 0.007),
    ("Mn", 0.03), ("Si", 0.02), ("Sn", 0.005),
])
def test_limit_at_the_standards_lowest_quantitative_content_is_no_wider_than_the_content(
        symbol: str, lower_limit_pct: float) -> None:
    # At the lowest content the standard calls quantitative, two burns differing by 100 % of the
    # content must be flagged: otherwise the default limits would be too loose to catch anything there.
    assert default_curve(symbol).limit_pct(lower_limit_pct) <= lower_limit_pct


# ---------------------------------------------------------------------------------------------
# The shop's layout


SHOP_LAYOUT = {
    "sample_column": "Probe",
    "burn_column": "Funken",
    "delimiter": ";",
    "decimal": ",",
    "ignore_columns": ["Zeit"],
    "columns": {"Kohlenstoff": "C", "Silizium": "Si", "Mangan": "Mn", "Stickstoff": "N"},
    "units": {"Stickstoff": "ppm"},
}


def test_shop_layout_maps_its_own_headers() -> None:
    result = read_export(DATA / "shop_layout.csv", ShopSettings(spectrometer=SHOP_LAYOUT))
    sample = result.sample("KB-24119-1")
    assert dict(sample.analysis.pct) == pytest.approx({"C": 0.083, "Si": 0.013, "Mn": 0.414, "N": 59.5 * PPM})
    assert [b.label for b in sample.burns] == ["1", "2"]
    assert result.ignored_columns == ("Zeit",)


def test_shop_encoding_reads_a_windows_export() -> None:
    result = read_export(DATA / "cp1252.csv", ShopSettings(spectrometer={"encoding": "cp1252"}))
    assert dict(result.samples[0].analysis.pct) == pytest.approx({"C": 0.15, "Mn": 0.61})
    assert result.ignored_columns == ("Temp °C",)


def test_shop_decimal_setting_rejects_the_other_style() -> None:
    with pytest.raises(InputError) as caught:
        read_export(DATA / "bom_comma.csv", ShopSettings(spectrometer={"decimal": ","}))
    assert caught.value.field == "row 2, column 'C'"


def test_shop_repeatability_override() -> None:
    layout = ExportLayout.from_settings({"repeatability": {"Mn": 0.05, "C": {"floor_pct": 0.03}}})
    assert layout.curve("Mn") == RepeatabilityCurve(0.05, 0.0, 0.0)
    assert layout.curve("C").limit_pct(0.2) == pytest.approx(0.03)
    result = read_export(DATA / "three_burns_outlier.csv", ShopSettings(spectrometer={"repeatability": {"Mn": 0.05}}))
    assert not result.samples[0].flags


@pytest.mark.parametrize(("raw", "field"), [
    ({"sample_colum": "Probe"}, "spectrometer.sample_colum"),
    ({"delimiter": "::"}, "spectrometer.delimiter"),
    ({"decimal": ",", "delimiter": ","}, "spectrometer.decimal"),
    ({"encoding": "klingon-8"}, "spectrometer.encoding"),
    ({"columns": {"Kohlenstoff": "Kh"}}, "spectrometer.columns.Kohlenstoff"),
    ({"columns": {"Eisen": "Fe"}}, "spectrometer.columns.Eisen"),
    ({"units": {"N": "ppb"}}, "spectrometer.units.N"),
    ({"repeatability": {"Mn": -1}}, "spectrometer.repeatability.Mn"),
    ({"repeatability": {"Mn": {"flor_pct": 0.1}}}, "spectrometer.repeatability.Mn.flor_pct"),
    ({"ignore_columns": "Zeit"}, "spectrometer.ignore_columns"),
])
def test_bad_layout_settings_name_their_key(raw: dict[str, object], field: str) -> None:
    with pytest.raises(InputError) as caught:
        ExportLayout.from_settings(raw)
    assert caught.value.field == field


def test_configured_columns_must_exist() -> None:
    with pytest.raises(InputError, match="no column 'Funken'"):
        read_export(DATA / "bom_comma.csv", ShopSettings(spectrometer={"burn_column": "Funken"}))


# ---------------------------------------------------------------------------------------------
# What else the result carries


def test_grade_heat_ignored_columns_and_notes() -> None:
    result = read_export(DATA / "grade_and_heat_columns.csv")
    sample = result.samples[0]
    assert (sample.grade, sample.heat) == ("S355J2", "24117")
    assert result.ignored_columns == ("Time", "Fe")
    notes = read_export(DATA / "preamble_and_mean_row.csv").notes
    assert notes == ("lines 1–2 above the header were not read",
                     "row 6: the instrument's 'Mean' row was not read (meltfix averages the burns itself)")


def test_a_fresh_spark_appended_later_joins_its_sample_and_settles_which_burn_was_wrong() -> None:
    # C: 0.30, 0.33, then 0.305 sparked later. Burn 2 is |0.33 - (0.30+0.305)/2| = 0.0275 from the
    # others, beyond r(0.3025) = 0.018*sqrt(0.3025) = 0.0099; burns 1 and 3 are within it.
    result = read_export(DATA / "repeated_header.csv")
    sample = result.samples[0]
    assert [b.label for b in sample.burns] == ["1 (row 2)", "2", "1 (row 5)"]
    assert [b.outlier_in for b in sample.burns] == [frozenset(), {"C"}, frozenset()]
    assert result.notes == ("row 4: a repeated header was not read",)


def test_samples_keep_file_order_and_rows_are_file_lines() -> None:
    body = "Sample;C\nKB-2;0,1\nKB-1;0,2\nKB-2;0,1\n"
    result = parse_export(body, "x.csv")
    assert [s.sample_id for s in result.samples] == ["KB-2", "KB-1"]
    assert [b.row for b in result.sample("KB-2").burns] == [2, 4]
    assert [b.row for b in read_export(DATA / "sep_line.csv").samples[0].burns] == [3, 4]


def test_missing_file_and_folder() -> None:
    with pytest.raises(InputError, match="file not found"):
        read_export(DATA / "no_such_export.csv")
    with pytest.raises(InputError, match="is a folder"):
        read_export(DATA)
