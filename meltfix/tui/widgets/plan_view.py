"""The plan panel: status, additions, totals, chemistry gauges, what binds, and the cautions.

The panel never decides whether its plan is current: the screen says so (``show`` for a plan
that matches the inputs, ``mark_updating`` / ``mark_stale`` otherwise), and the panel makes the
difference impossible to miss.
"""

from __future__ import annotations

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Vertical, VerticalScroll
from textual.content import Content
from textual.widgets import Static

from meltfix.base.units import Units
from meltfix.plan.numbers import content_text, kg_text, limit_text, miss_text, money_text, packs_text, unit_of
from meltfix.plan.result import Plan, RiskPlan
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat
from meltfix.tui.widgets.gauge import ChemistryGauges, gauge_rows
from meltfix.tui.widgets.why_not import WhyNot


class PlanView(Vertical):
    """The right-hand panel of the trim screen."""

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.plan: Plan | None = None
        """The plan on display (current or not: see ``is_current``)."""
        self.is_current = False

    def compose(self) -> ComposeResult:
        # The why-not line and the body's sections after the totals are mounted the first time they
        # have something to say: most plans need none of them, and a hidden widget is still styled
        # and mounted before the first frame.
        yield Static("◌ planning…", id="plan-status")
        with VerticalScroll(id="plan-body", can_focus=True) as body:
            body.border_title = "Plan"
            yield Static(id="plan-additions")
            yield Static(id="plan-totals")
        # Outside the scroll: every gauge stays in view however little room the panel has.
        yield ChemistryGauges(id="plan-gauges")
        with VerticalScroll(id="plan-cautions", can_focus=True) as cautions:
            cautions.border_title = "Cautions"
            yield Static(id="plan-cautions-text")

    # -- what the screen calls ------------------------------------------------------------
    def show(self, heat: Heat, plan: Plan, grade: Grade, risk: RiskPlan | None = None, units: Units = Units()) -> None:
        """Show a plan that matches the inputs on screen (with its odds against the target, when given),
        masses, costs per ton and temperatures in the shop's ``units``."""
        self.plan, self.is_current = plan, True
        self.remove_class("-stale")
        self.set_class(plan.status != "optimal", "-closest")
        odds = "" if risk is None else f"{100 * risk.odds.heat:.0f} % odds"
        if plan.status == "optimal" and (risk is None or risk.reached):
            status = Content.assemble(("● current", "bold $text-success"), " · every window met",
                                      f" · {odds}" if odds else "")
        elif plan.status == "optimal" and risk is not None:
            status = Content.assemble(("▲ current · met on paper", "bold $text-warning"),
                                      f" · {odds}, short of the {100 * risk.target:g} % target")
        else:
            status = Content.assemble(("▲ current · closest plan", "bold $text-error"),
                                      " · the grade cannot be met, see why below")
        self.query_one("#plan-status", Static).update(status)
        self._quiet()
        self.query_one("#plan-additions", Static).update(_additions_table(plan, units))
        self.query_one("#plan-totals", Static).update(_totals(plan, units))
        self._section("plan-out-of-reach", _out_of_reach(plan) if plan.violations else None)
        self.query_one(ChemistryGauges).show(gauge_rows(grade, heat.analysis.pct, plan.predicted_pct,
                                                        None if risk is None else risk.odds.limits))
        self._section("plan-binding", _binding(plan) if plan.binding else None)
        self._section("plan-notes", Content.assemble(("Notes: ", "bold"), " ".join(plan.notes)) if plan.notes else None)
        self.query_one("#plan-cautions-text", Static).update(
            Content("\n").join(Content.assemble(("• ", "bold $text-warning"), caution) for caution in plan.cautions))
        cautions = self.query_one("#plan-cautions")
        cautions.border_title = f"Cautions ({len(plan.cautions)})"

    def mark_updating(self) -> None:
        """The inputs changed and a new plan is on its way: the one shown is no longer current.

        Only the status line says so: the new plan is milliseconds away, and dimming the whole
        panel for that long would only flicker.
        """
        self.is_current = False
        self.query_one("#plan-status", Static).update(Content.styled("◌ updating…", "$foreground-muted"))
        self._quiet()

    def mark_stale(self, reason: str) -> None:
        """No plan can be made for the inputs: keep the old one visible, plainly marked as old."""
        self.is_current = False
        self.add_class("-stale")
        prefix = "✗ the plan below is for earlier inputs: " if self.plan is not None else "✗ no plan: "
        self.query_one("#plan-status", Static).update(Content.assemble((prefix, "bold $text-error"), reason))
        self._quiet()

    @property
    def why_not(self) -> WhyNot:
        """The line under the status saying why a key did nothing; gone at the next change of the plan."""
        found = self.query_children("#plan-why-not")
        if found:
            return found.first(WhyNot)
        line = WhyNot(id="plan-why-not")
        self.mount(line, after="#plan-status")
        return line

    def _quiet(self) -> None:
        """Hide the why-not line, if it was ever shown: what it explained has changed."""
        for line in self.query_children(WhyNot):
            line.say(None)

    def _section(self, section_id: str, content: Content | None) -> None:
        """Show ``content`` in the body's section ``section_id`` (None hides it), in the order of ``_SECTIONS``."""
        body = self.query_one("#plan-body", VerticalScroll)
        found = body.query_children(f"#{section_id}")
        if found:
            section = found.first(Static)
            section.update(content or "")
            section.display = content is not None
        elif content is not None:
            later = [f"#{name}" for name in _SECTIONS[_SECTIONS.index(section_id) + 1:] if body.query_children(f"#{name}")]
            body.mount(Static(content, id=section_id), before=later[0] if later else None)


_SECTIONS = ("plan-out-of-reach", "plan-binding", "plan-notes")
"""The body's sections after the totals, in their order on screen."""


def _additions_table(plan: Plan, units: Units) -> Table:
    cur = plan.currency
    # No rule under the header: at 80x24 that row is worth more to the additions themselves.
    table = Table(box=None, expand=True, padding=(0, 1), pad_edge=False, show_edge=False,
                  header_style="bold underline")
    table.add_column("Add", ratio=1, overflow="fold")
    table.add_column(f"{units.mass_unit} (packs)", justify="right", no_wrap=True)
    table.add_column(cur, justify="right", no_wrap=True)
    for addition in plan.additions:
        packs = packs_text(addition, units)
        table.add_row(Text(addition.material), kg_text(units.mass(addition.kg)) + (f" ({packs})" if packs else ""),
                      money_text(addition.cost))
    if not plan.additions:
        table.add_row("nothing to add", "", "")
    return table


def _totals(plan: Plan, units: Units) -> Content:
    cur = plan.currency
    mass = units.mass_unit
    return Content.assemble(
        ("Total ", "bold"), (f"{money_text(plan.total_cost)} {cur}", "bold"),
        f" · {money_text(units.per_ton(plan.cost_per_t))} {cur}/{units.ton_unit}\n",
        (f"bath +{kg_text(units.mass(plan.added_kg))} {mass} → {kg_text(units.mass(plan.final_kg))} {mass} · "
         f"{units.temperature_change(-plan.temperature_drop_c):+.1f} {units.temperature_unit}", "$foreground-muted"),
    )


def _out_of_reach(plan: Plan) -> Content:
    lines = [Content.styled("Out of reach", "bold $text-error")]
    for v in plan.violations:
        unit = unit_of(v.element)
        lines.append(Content.assemble(
            (f"{v.element} {v.limit} {limit_text(v.element, v.limit_pct)} {unit}", "bold"),
            f": {content_text(v.element, v.predicted_pct)} {unit} after, off by "
            f"{miss_text(v.element, v.by_pct)}. ", v.reason))
    return Content("\n").join(lines)


def _binding(plan: Plan) -> Content:
    lines = [Content.styled("What the cost hangs on", "bold")]
    for b in plan.binding:
        lines.append(Content.assemble(f"{b.name}: ", (f"{money_text(b.saving)} {plan.currency}", "bold"),
                                      f" saved per {b.unit}"))
    return Content("\n").join(lines)
