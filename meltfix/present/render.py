"""Rich rendering of plans for the plain command line (kept out of the domain objects)."""

from __future__ import annotations

from rich.console import Console, Group, RenderableType
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from meltfix.base.outputs import markup_safe, visible
from meltfix.base.units import Units
from meltfix.plan.numbers import (binding_text, content_text, kg_text, limit_text, margin_text, miss_text, money_text,
                                  pack_mass_text, unit_of)
from meltfix.plan.result import Odds, Plan, RiskPlan, is_outside


def odds_lines(odds: Odds, risk: RiskPlan | None = None) -> list[str]:
    """The heat's in-spec odds and its weakest limits; with ``risk``, the target and the expected
    total cost. Plain text, so the crew ticket prints the very lines ``meltfix solve`` does."""
    weakest = sorted(((p, label) for label, p in odds.limits.items() if p < 1.0))[:3]
    line = f"In-spec odds {100 * odds.heat:.1f} % ({odds.draws:,} draws, seed {odds.seed})"
    if risk is not None:
        line += f" · target {100 * risk.target:g} %"
    if weakest:
        line += " · weakest: " + ", ".join(f"{label} {100 * p:.1f} %" for p, label in weakest)
    lines = [line]
    if risk is not None and risk.correction_cost:
        cur = risk.plan.currency
        lines.append(f"Expected total cost {money_text(risk.expected_total_cost)} {cur} (additions + "
                     f"{100 * (1 - odds.heat):.1f} % × {money_text(risk.correction_cost)} {cur} a correction)")
    return lines


def odds_text(odds: Odds, risk: RiskPlan | None = None) -> Text:
    """:func:`odds_lines` as one Rich text, bold yellow when the odds fall short."""
    short = odds.heat < (0.9 if risk is None else risk.target)
    return Text("\n".join(odds_lines(odds, risk)), style="bold yellow" if short else "bold")


def headline(plan: Plan, risk: RiskPlan | None = None) -> str:
    """The plan's verdict in markup: never "all windows met" when the odds fall short of the target."""
    if plan.status != "optimal":
        return "[bold red]closest plan: windows missed[/]"
    if risk is not None and not risk.reached:
        return (f"[bold yellow]windows met on paper, but only {100 * risk.odds.heat:.1f} % odds "
                f"(target {100 * risk.target:g} %)[/]")
    return "[green]all windows met[/]" + ("" if risk is None else f" · {100 * risk.odds.heat:.1f} % odds")


def plan_renderable(plan: Plan, odds: Odds | None = None, risk: RiskPlan | None = None,
                    units: Units = Units()) -> Group:
    """The plan as rich tables: additions, predicted chemistry, binding limits, cautions; with
    ``odds``, a line of in-spec odds under the chemistry (and the target, with ``risk``). Masses,
    costs per ton and temperatures in the shop's ``units``; notes and cautions stay as written."""
    title = f"Heat {markup_safe(plan.heat_id)} · {markup_safe(plan.grade)} · " + headline(plan, risk)
    parts: list[RenderableType] = [Text.from_markup(title), _additions_table(plan, units), _chemistry_table(plan)]
    if odds is not None:
        parts.append(odds_text(odds, risk))
    if plan.violations:
        parts.append(Panel(Text("\n".join(visible(
            f"• {v.element} {v.limit} {limit_text(v.element, v.limit_pct)} {unit_of(v.element)}: off by "
            f"{miss_text(v.element, v.by_pct)} {unit_of(v.element)}. {v.reason}") for v in plan.violations)),
            title="Why the grade cannot be met", border_style="red"))
    if plan.binding:
        bind = Table(title="What holds the cost up", title_justify="left")
        bind.add_column("Limit")
        bind.add_column(f"saves {plan.currency}", justify="right")
        bind.add_column("per")
        for b in plan.binding:
            bind.add_row(Text(visible(b.name)), *binding_text(b, units))
        parts.append(bind)
    if plan.notes:
        parts.append(Text(visible("Notes: " + " ".join(plan.notes)), style="dim"))
    parts.append(Panel(Text("\n".join(visible(f"• {c}") for c in plan.cautions)), title="Cautions",
                       border_style="yellow"))
    return Group(*parts)


def _additions_table(plan: Plan, units: Units) -> Table:
    mass = units.mass_unit
    cur = plan.currency
    adds = Table(title="Additions", title_justify="left", expand=False)
    adds.add_column("Material")
    adds.add_column(mass, justify="right")
    adds.add_column("packs", justify="right")
    adds.add_column(f"cost {cur}", justify="right")
    adds.add_column("how (in this order)")
    hows = [step.text(units) for step in plan.steps] if plan.steps else [""] * len(plan.additions)
    for a, how in zip(plan.additions, hows):
        packs = "" if a.packs is None or a.pack_kg is None else f"{a.packs} × {pack_mass_text(a.pack_kg, units)} {mass}"
        adds.add_row(Text(visible(a.material)), kg_text(units.mass(a.kg)), packs,
                     money_text(a.cost), how)
    if not plan.additions:
        adds.add_row("(nothing to add)", "", "", "", "")
    adds.add_section()
    adds.add_row("Total", kg_text(units.mass(plan.added_kg)), "", money_text(plan.total_cost), "")
    adds.caption = (f"{money_text(units.per_ton(plan.cost_per_t))} {cur}/{units.ton_unit} · bath "
                    f"{kg_text(units.mass(plan.bath_kg))} → {kg_text(units.mass(plan.final_kg))} {mass} · "
                    f"temperature {units.temperature_change(-plan.temperature_drop_c):+.1f} {units.temperature_unit}")
    return adds


def _chemistry_table(plan: Plan) -> Table:
    chem = Table(title="Predicted chemistry (wt %, ppm for N O B H)", title_justify="left")
    for column in ("Limit", "min", "predicted", "max", "margin"):
        chem.add_column(column, justify="right" if column != "Limit" else "left")
    # One row per element: its min and max, and the smaller of the two margins (negative = missed).
    rows: dict[str, dict[str, float]] = {}
    for check in plan.checks:
        row = rows.setdefault(check.element, {"predicted": check.predicted_pct, "margin": check.margin_pct})
        row[check.limit] = check.limit_pct
        row["margin"] = min(row["margin"], check.margin_pct)
    for element, row in rows.items():
        low, high = row.get("min"), row.get("max")
        chem.add_row(element, "" if low is None else limit_text(element, low),
                     content_text(element, row["predicted"]), "" if high is None else limit_text(element, high),
                     margin_text(element, row["margin"]), style="red" if is_outside(row["margin"]) else "")
    return chem


def print_plan(plan: Plan, console: Console | None = None, odds: Odds | None = None,
               risk: RiskPlan | None = None, units: Units = Units()) -> None:
    (console or Console()).print(plan_renderable(plan, odds, risk, units))
