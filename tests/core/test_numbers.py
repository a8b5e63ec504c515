"""One rule per quantity for every output (meltfix.plan.numbers), and the tables that use it."""

from __future__ import annotations

import io

from rich.console import Console

from meltfix.base.units import Units
from meltfix.plan import planner
from meltfix.plan.numbers import (binding_text, content_text, limit_text, margin_text, miss_text, recovery_text,
                                  unit_of, with_unit)
from meltfix.plan.result import LIMIT_TOL_PCT, Binding, is_outside


def test_limits_keep_the_decimals_their_standard_writes() -> None:
    # ASTM A29 Table 1, 1045 (from memory): C 0.43-0.50, Mn 0.60-0.90, P 0.040 max, S 0.050 max.
    assert [limit_text("C", 0.43), limit_text("C", 0.5), limit_text("Mn", 0.6), limit_text("Mn", 0.9)] == \
        ["0.43", "0.50", "0.60", "0.90"]
    assert [limit_text("P", 0.04), limit_text("S", 0.05)] == ["0.040", "0.050"]
    # ASTM A240 Table 1, type 304 (from memory): Cr 18.0-20.0, Ni 8.0-10.5, N 0.10 max (1000 ppm).
    assert [limit_text("Cr", 18), limit_text("Ni", 10.5), limit_text("N", 0.10)] == ["18.00", "10.50", "1000"]
    # EN 10025-2 Table 2, S355J2 up to 40 mm: CEV max 0.45 (an index, two decimals).
    assert limit_text("CEV", 0.45) == "0.45"
    # A shop's own limit finer than the standard's places is never rounded away.
    assert limit_text("C", 0.045) == "0.045"


def test_contents_carry_one_decimal_more_than_their_limits_and_ppm_for_the_gases() -> None:
    assert content_text("C", 0.4553) == "0.455"
    assert content_text("P", 0.0143) == "0.0143"
    assert content_text("Cr", 17.85) == "17.850"
    # N, O, B, H in ppm as spectrometers and gas analysers report them (common practice).
    assert (content_text("N", 0.0068), unit_of("N")) == ("68", "ppm")
    assert (content_text("B", 0.00002), unit_of("B")) == ("0.2", "ppm")
    assert unit_of("Mn") == "%"


def test_a_miss_keeps_its_minus_and_float_noise_does_not() -> None:
    assert planner.LIMIT_TOL_PCT is LIMIT_TOL_PCT  # the planner judges limits with the same tolerance
    assert margin_text("C", -0.00004) == "-0.000" and is_outside(-0.00004)
    assert margin_text("C", -LIMIT_TOL_PCT / 2) == "+0.000" and not is_outside(-LIMIT_TOL_PCT / 2)
    assert margin_text("N", -0.00001) == "-0.1"
    assert margin_text("P", 0.0123) == "+0.0123"


def test_a_miss_too_small_for_the_decimals_shown_still_reads_as_a_miss() -> None:
    assert miss_text("C", 0.00004) == "<0.001" and miss_text("S", 0.00004) == "<0.0001"
    assert miss_text("N", 0.000001) == "<0.1"  # 0.01 ppm
    assert miss_text("Mn", 0.0123) == "0.012" and with_unit("N", miss_text("N", 0.0015)) == "15 ppm"


def test_recoveries_read_one_way() -> None:
    assert recovery_text(0.9) == "90.0 %" and recovery_text(0.617) == "61.7 %" and recovery_text(None) == "–"


def test_plan_table_marks_a_miss_that_rounds_to_zero_in_red() -> None:
    from dataclasses import replace

    from meltfix.commands.screen import first_demo_heat
    from meltfix.plan.planner import Planner
    from meltfix.present.render import plan_renderable
    from meltfix.shop.heat import load_heat
    from meltfix.shop.recipes import load_recipes

    book = load_recipes()
    plan = Planner(book).plan(load_heat(first_demo_heat(), book))
    check = plan.checks[0]
    # The same plan with its first check just outside its limit, by less than the last decimal shown.
    missed = replace(check, margin_pct=-0.00004)
    plan = replace(plan, checks=(missed, *plan.checks[1:]))
    console = Console(record=True, width=120, file=io.StringIO(), force_terminal=True, color_system="standard")
    console.print(plan_renderable(plan))
    row = next(line for line in console.export_text(styles=True).splitlines() if "-0.000" in line)
    assert f"\x1b[31m{check.element} " in row and "\x1b[31m -0.000" in row  # the whole row red


def test_what_holds_the_cost_up_is_priced_per_the_shops_unit() -> None:
    # NIST SP 811 (2008), Appendix B: 1 lb = 0.45359237 kg and 1 short ton = 907.18474 kg exactly;
    # a temperature interval of 1 °F is 5/9 K.
    us = Units("us")
    assert binding_text(Binding("stock of FeV 80", 10.0, "1 kg more in stock", "kg"), us) == \
        ("4.54", "1 lb more in stock")
    assert binding_text(Binding("vessel capacity", 100.0, "1 t more free capacity", "t"), us) == \
        ("90.72", "1 short ton more free capacity")
    assert binding_text(Binding("temperature drop limit", 9.0, "1 °C more allowed drop", "degC"), us) == \
        ("5.00", "1 °F more allowed drop")
    limit = Binding("Mn min 0.6 %", 3.0, "0.01 % lower limit")
    assert binding_text(limit, us) == binding_text(limit) == ("3.00", "0.01 % lower limit")
