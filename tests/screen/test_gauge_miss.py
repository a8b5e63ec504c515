"""The screen's chemistry gauge judges a limit with the one tolerance (meltfix.plan.result.LIMIT_TOL_PCT)."""

from __future__ import annotations

from meltfix.plan.result import LIMIT_TOL_PCT
from meltfix.tui.widgets.gauge import GaugeRow, gauge_line


def test_the_screen_gauge_marks_a_miss_that_rounds_to_zero_red() -> None:
    def after_style(after_pct: float) -> str:
        line = gauge_line(GaugeRow("C", 0.10, 0.20, None, 0.15, after_pct), 20)
        return next(str(span.style) for span in line.spans if line.plain[span.start:span.end].strip() == "0.200")

    assert "error" in after_style(0.20004) and "success" in after_style(0.20 + LIMIT_TOL_PCT / 2)
