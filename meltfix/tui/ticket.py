"""The plain-text ticket for the furnace crew: what to add, what the bath should become, and the cautions.

Plain text on purpose: it is printed or shown on a pulpit screen, and must read the same anywhere.
"""

from __future__ import annotations

import re
import shlex
import shutil
import subprocess
import textwrap
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING

from meltfix.base.outputs import write_atomic
from meltfix.base.units import Units
from meltfix.plan.numbers import content_text, kg_text, limit_text, money_text, pack_mass_text, unit_of
from meltfix.plan.result import Plan, RiskPlan
from meltfix.present.render import odds_lines
from meltfix.shop.elements import element_sort_key
from meltfix.shop.grades import Grade
from meltfix.shop.recipes import RecipeBook

if TYPE_CHECKING:
    from meltfix.shop.heat import Heat

_WIDTH = 72


# A content the plan changes by less than this is not "moved" [wt %].
_MOVED_PCT = 0.0005


def ticket_text(heat: "Heat", plan: "Plan", book: RecipeBook, written: datetime, *, sample: str | None = None,
                plan_number: int | None = None, risk: RiskPlan | None = None) -> str:
    """The ticket as text lines of at most 72 characters (longer names are left whole): heat, sample,
    plan number, time and stage; the additions in order with their lots; the predicted chemistry of
    the grade's elements and of every element the plan moves; with ``risk`` (the plan's odds), the
    lines ``meltfix solve`` prints: the heat's odds, the shop's target, the weakest limits with
    their odds and the expected total cost; the temperature; the cautions; and a line for the
    signature of the person who decides. The screen always records the plan first, so its tickets
    carry their plan number (:func:`write_ticket`)."""
    units = book.settings.units  # masses and temperatures as the crew reads them; the chemistry is wt %
    mass = units.mass_unit
    lines = [
        f"ADDITION TICKET — {book.settings.shop_name}",
        f"Heat {plan.heat_id}   sample {sample or '—'}   plan {'#' + str(plan_number) if plan_number else 'not accepted yet'}",
        f"Grade {plan.grade}   stage {heat.stage}   written {written:%Y-%m-%d %H:%M}",
        f"Bath {kg_text(units.mass(plan.bath_kg))} {mass} -> {kg_text(units.mass(plan.final_kg))} {mass} after the additions "
        "dissolve",
        "",
    ]
    if plan.status != "optimal":
        lines += ["*** CLOSEST PLAN: THE GRADE IS NOT MET — see 'Out of reach' below ***", ""]
    lines += _addition_lines(plan, units)
    lines += ["", f"Cost {money_text(plan.total_cost)} {plan.currency} "
                  f"({money_text(units.per_ton(plan.cost_per_t))} {plan.currency}/{units.ton_unit})   "
                  f"temperature change {units.temperature_change(-plan.temperature_drop_c):+.1f} "
                  f"{units.temperature_unit}"]
    lines += _temperature_lines(heat, plan, units)
    if risk is not None:
        for line in odds_lines(risk.odds, risk):
            lines += textwrap.wrap(line, _WIDTH, subsequent_indent="  ", break_on_hyphens=False)
    lines += ["", *_chemistry_lines(heat, plan, book.grade(plan.grade))]
    if plan.violations:
        lines += ["", "OUT OF REACH"]
        for violation in plan.violations:
            head = (f"{violation.element} {violation.limit} {limit_text(violation.element, violation.limit_pct)}"
                    f" {unit_of(violation.element)}: ")
            lines += _bullet(head + violation.reason)
    lines += ["", "CAUTIONS"]
    for caution in plan.cautions:
        lines += _bullet(caution)
    lines += ["", "DECIDED BY (name) ____________________   SIGNATURE __________________",
              "TIME ________",
              "The tool advises; the person signing decides, under the shop's",
              "procedures and local codes."]
    return "\n".join(lines) + "\n"


def _addition_lines(plan: "Plan", units: Units) -> list[str]:
    """The additions in the shop's order, each with its packs and, where it is split, its lots."""
    mass = units.mass_unit
    lines = ["ADD, IN THIS ORDER"]
    if not plan.additions:
        return lines + ["  nothing: the bath is already where it should be"]
    lines.append(f"  {'material':<30}{mass:>10}")
    steps = plan.steps or (None,) * len(plan.additions)
    for number, (addition, step) in enumerate(zip(plan.additions, steps), start=1):
        packs = "" if addition.packs is None else (
            f"  = {addition.packs} pack{'s' if addition.packs != 1 else ''} of "
            f"{pack_mass_text(addition.pack_kg or 0.0, units)} {mass}")
        lines.append(f"{number:>2} {addition.material:<29}{kg_text(units.mass(addition.kg)):>10}{packs}")
        if step is not None and (step.metres is not None or len(step.portions_kg) > 1):
            lines.append(f"{'':<5}{step.text(units)}")
    lines.append(f"  {'total':<30}{kg_text(units.mass(plan.added_kg)):>10}")
    return lines


def _chemistry_lines(heat: "Heat", plan: "Plan", grade: Grade) -> list[str]:
    """The grade's elements and every element the plan moves: now, after, min, aim, max."""
    lines = ["CHEMISTRY (wt %, N O B H in ppm)", f"  {'':<4}{'now':>9}{'after':>9}{'min':>9}{'aim':>9}{'max':>9}"]
    moved = sorted((s for s, after in plan.predicted_pct.items() if s not in grade.window_pct
                    and abs(after - heat.analysis.pct.get(s, 0.0)) >= _MOVED_PCT), key=element_sort_key)
    for symbol in grade.elements + tuple(moved):
        low, high = grade.window_pct.get(symbol, (0.0, 0.0))
        aim = grade.aim_pct.get(symbol)
        now = heat.analysis.pct.get(symbol)
        if symbol in heat.not_measured:
            lines.append(f"  {symbol:<4}{'not measured: NOT CHECKED':>27}")
            continue
        cells = [
            "—" if now is None else content_text(symbol, now),
            content_text(symbol, plan.predicted_pct.get(symbol, 0.0)),
            limit_text(symbol, low) if low > 0 else "",
            "" if aim is None else limit_text(symbol, aim),
            limit_text(symbol, high) if symbol in grade.window_pct else "no limit",
        ]
        flag = "  <- out" if any(v.element == symbol for v in plan.violations) else ""
        lines.append(f"  {symbol:<4}" + "".join(f"{c:>9}" for c in cells) + flag)
    return lines


def _temperature_lines(heat: "Heat", plan: "Plan", units: Units) -> list[str]:
    lines = []
    deg = units.temperature_unit
    if plan.reheat_c > 0:
        lines.append(f"Arc heating about {units.temperature_change(plan.reheat_c):.0f} {deg} "
                     f"({plan.reheat_min:.0f} min), {money_text(plan.reheat_cost)} {plan.currency}")
    if plan.temperature_after_c is not None and heat.temperature_c is not None:
        lines.append(f"Temperature {units.temperature(heat.temperature_c):.0f} {deg} now -> about "
                     f"{units.temperature(plan.temperature_after_c):.0f} {deg} after")
        if plan.liquidus_c is not None and plan.superheat_c is not None:
            lines.append(f"  liquidus about {units.temperature(plan.liquidus_c):.0f} {deg}, superheat "
                         f"{units.temperature_change(plan.superheat_c):g} {deg}")
    return lines


def _bullet(text: str) -> list[str]:
    return textwrap.wrap(text, _WIDTH, initial_indent="  - ", subsequent_indent="    ", break_on_hyphens=False)


def write_ticket(folder: Path, heat: "Heat", plan: "Plan", book: RecipeBook, written: datetime, *,
                 sample: str | None = None, plan_number: int | None = None, risk: RiskPlan | None = None) -> Path:
    """Write the ticket as ``<heat>-ticket.txt`` in ``folder``; an earlier ticket is never overwritten."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", plan.heat_id).strip("._") or "heat"
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"{stem}-ticket.txt"
    number = 2
    while path.exists():
        path = folder / f"{stem}-ticket-{number}.txt"
        number += 1
    # Never overwrite: should another writer take the name in between, fail rather than replace it.
    text = ticket_text(heat, plan, book, written, sample=sample, plan_number=plan_number, risk=risk)
    return write_atomic(path, text, what="the ticket", overwrite=False)


def print_ticket(path: Path, command: str) -> str:
    """Send a written ticket to the shop's printer command (e.g. "lp -d pulpit"); returns what
    happened in words. A machine without the command is told, not failed."""
    argv = shlex.split(command)
    if not argv or shutil.which(argv[0]) is None:
        return f"not printed: no printer command '{argv[0] if argv else command}' on this machine"
    try:
        done = subprocess.run([*argv, str(path)], capture_output=True, text=True, timeout=30, check=False)
    except (OSError, subprocess.TimeoutExpired) as exc:
        return f"not printed: {exc}"
    if done.returncode != 0:
        return f"not printed: {argv[0]} said {(done.stderr or done.stdout).strip()[:120]}"
    return f"sent to the printer ({command})"
