"""The hand method: how a melt shop trims a heat without an optimiser, kept as the baseline to beat.

The melter works down a sheet of elements in a fixed order, with one usual alloy per element, and
works out each amount from the single-element mass balance
(:func:`meltfix.plan.massbalance.single_addition_kg`) on the bath as predicted so far, so what an alloy
carries of later elements (carbon in ferromanganese) is seen when their turn comes, and what it
carries of earlier ones on the next pass. Passes repeat until nothing more is needed. A residual
over its maximum is diluted with clean material at the start of each pass. Stock is respected
(when the usual alloy runs out the next one on the list is used) and the trim stops when the vessel
is full. When manganese and silicon are both short, silicomanganese (a material carrying both) goes
first for manganese. A competent melter keeps the same margin inside each limit that the shop's
planner keeps (``margins_pct``), and works out a ductile-iron treatment from the sulphur reading
and the fade before pouring (the magnesium owed, meltfix.plan.treatment) and an aluminium trim
from an oxygen-probe reading, as the planner does.

Then the melter checks, as on the floor: a carbon equivalent over its maximum has the sheet done
again with the elements it weighs aimed lower (manganese first, none below its minimum); a trim
that would cool the bath more than the stage allows, or below the liquidus plus the shop's
superheat when the temperature is measured, has its most chilling additions cut to fit (the rest
waits for reheating or the next sample). A ladle furnace's arcs are not used to buy the drop back.

Everything here is common practice, from no published source; the rules are spelled out in
:class:`HandRules` so that a comparison with the planner can say exactly what it compared against.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from meltfix.plan.massbalance import bath_after, recheck, single_addition_kg, temperature_drop_c
from meltfix.plan.result import LIMIT_TOL_PCT, Addition, LimitCheck, addition
from meltfix.plan.treatment import contents_owed_pct
from meltfix.shop.elements import element_sort_key
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat, checked_grade, usable_materials, validate_heat
from meltfix.shop.liquidus import formula_for
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.settings import ShopSettings

# The sheet order: the big carbon-free alloys first, then those that carry carbon; magnesium (the
# nodulariser brings much silicon) before silicon, which the alloys before it also bring; carbon
# near the end because nearly every alloy carries it; aluminium last, the final deoxidiser
# (common practice). Other elements go between.
_FIRST = ("Ni", "Mo", "Cu", "Cr", "Mn", "V", "Nb", "Ti", "B", "Mg")
_LAST = ("Si", "C", "Al")
# Times the sheet is done again with lower aims for a carbon equivalent over its maximum.
_INDEX_ROUNDS = 5


@dataclass(frozen=True)
class HandRules:
    """How the melter works. The defaults are common practice (no published source)."""

    aim_band: float = 0.05
    """Inside the window, a gap to the aim smaller than this fraction of the window is left alone."""
    dilution_margin: float = 0.10
    """A residual over its maximum is diluted to this fraction of its window below the maximum."""
    loose_step_kg: float = 1.0
    """Loose alloys are weighed up to the next step [kg]; 0 = the exact amount."""
    scrap_step_kg: float = 50.0
    """Loose dilution material is weighed on the crane scale, up to the next step [kg]; 0 = exact."""
    max_passes: int = 10


@dataclass(frozen=True)
class HandPlan:
    """The hand method's answer for one heat. Masses [kg], contents [wt %], costs [currency]."""

    heat_id: str
    grade: str
    additions: tuple[Addition, ...]
    total_cost: float
    bath_kg: float
    final_kg: float
    """Bath mass after the additions dissolve [kg]."""
    predicted_pct: Mapping[str, float]
    checks: tuple[LimitCheck, ...]
    """The predicted analysis against every limit of the grade, indices included."""
    passes: int
    """Passes down the sheet until nothing more was needed (or the trim stopped)."""
    temperature_drop_c: float
    notes: tuple[str, ...]
    """What stopped or changed the melter's usual routine (stock, capacity, no carrier)."""
    currency: str = "EUR"

    @property
    def in_spec(self) -> bool:
        """True when the predicted analysis meets every limit of the grade."""
        return all(check.margin_pct >= -LIMIT_TOL_PCT for check in self.checks)

    @property
    def cost_per_t(self) -> float:
        """Cost per tonne of final bath [currency/t]."""
        return self.total_cost / (self.final_kg / 1000.0)


def sheet_order(grade: Grade) -> tuple[str, ...]:
    """The elements the melter raises, in the order of the sheet: those with an aim or a minimum."""
    raised = [s for s, (low, _) in grade.window_pct.items() if s in grade.aim_pct or low > 0]
    middle = sorted((s for s in raised if s not in _FIRST + _LAST), key=element_sort_key)
    return tuple([s for s in _FIRST if s in raised] + middle + [s for s in _LAST if s in raised])


def usual_materials(grade: Grade, materials: Sequence[Material], symbol: str) -> tuple[Material, ...]:
    """The materials the shop uses to raise ``symbol`` in ``grade``, usual one first.

    Ranked by the book's price per kg of the element that reaches the bath. A material that, raised across
    the whole window of ``symbol``, would carry in more of another element than that element's
    whole window is known on the floor as the wrong one for the grade (high-carbon ferrochromium in
    a low-carbon stainless, ferromanganese as a carbon raiser) and is left out, unless nothing else
    carries ``symbol``.
    """
    carriers = sorted((m for m in materials if m.yield_pct(symbol) > 0),
                      key=lambda m: m.price_per_kg / m.yield_pct(symbol))
    low, high = grade.window_pct[symbol]

    def right_for_grade(material: Material) -> bool:
        return all(material.yield_pct(other) / material.yield_pct(symbol) * (high - low)
                   <= (o_high - o_low) * (1 + 1e-9)
                   for other, (o_low, o_high) in grade.window_pct.items() if other != symbol)

    right = tuple(m for m in carriers if right_for_grade(m))
    return right or tuple(carriers)


class _Trim:
    """The melter's running sheet: what has been added so far and what the bath will be."""

    def __init__(self, heat: Heat, materials: Sequence[Material], owed_pct: Mapping[str, float]) -> None:
        self.heat = heat
        # What the bath owes before an addition counts (magnesium to sulphur and fade, aluminium to
        # dissolved oxygen): a melter works the treatment out from the sulphur reading.
        self.owed_pct = owed_pct
        self.kg: dict[str, float] = dict(heat.locked_kg)
        self.by_name = {m.name: m for m in materials}
        # For raising, an element reported below its detection limit counts as zero, as in the planner.
        self.low_analysis = heat.analysis.lowest_pct
        self.full = False
        self.notes: list[str] = []
        self.passes = 0

    def predicted(self, analysis_pct: Mapping[str, float]) -> tuple[float, dict[str, float]]:
        used = [(self.by_name[name], kg) for name, kg in self.kg.items()]
        return bath_after(self.heat.bath_kg, analysis_pct, used, self.owed_pct)

    def stock_left_kg(self, material: Material) -> float:
        stock = self.heat.material_stock_kg(material)
        return math.inf if stock is None else max(0.0, stock - self.kg.get(material.name, 0.0))

    def note(self, text: str) -> None:
        if text not in self.notes:
            self.notes.append(text)

    def add(self, material: Material, kg: float, final_kg: float) -> bool:
        """Add ``kg`` (already rounded), cut to the stock and the free capacity; False when nothing went in."""
        fit_kg = math.inf
        if self.heat.capacity_kg is not None:
            fit_kg = (self.heat.capacity_kg - final_kg) / material.mass_yield
        stock_kg = self.stock_left_kg(material)
        allowed_kg = min(kg, stock_kg, fit_kg)
        if material.pack_kg:
            allowed_kg = math.floor(allowed_kg / material.pack_kg + 1e-9) * material.pack_kg
        if allowed_kg < kg:
            if fit_kg < min(kg, stock_kg):
                self.full = True
                self.note("the vessel is full: the trim stopped at its capacity")
            else:
                self.note(f"the stock of {material.name} ran out")
        if allowed_kg <= 0 or allowed_kg < material.min_kg:
            return False
        self.kg[material.name] = self.kg.get(material.name, 0.0) + allowed_kg
        return True


def _step_up(kg: float, step_kg: float) -> float:
    return math.ceil(kg / step_kg - 1e-9) * step_kg if step_kg > 0 else kg


def _dilute(trim: _Trim, grade: Grade, clean: Sequence[Material], rules: HandRules,
            margins_pct: Mapping[str, float]) -> bool:
    """Dilute every residual over its maximum, the one needing most material first."""
    changed = False
    spent: set[str] = set()  # clean materials whose stock is gone (or below their minimum addition)
    for _ in range(len(grade.window_pct) + len(clean)):
        final_kg, pct = trim.predicted(trim.heat.analysis.pct)
        needs: list[tuple[float, Material]] = []
        for symbol, (low, high) in grade.window_pct.items():
            now = pct.get(symbol, 0.0)
            # Margins that meet in the middle leave the aim band of the middle (a pack's rounding).
            ceiling = max(high - margins_pct.get(f"{symbol} max", 0.0), (low + high) / 2.0 + rules.aim_band * (high - low))
            if now <= ceiling:
                continue
            target = min(high - rules.dilution_margin * (high - low), ceiling)
            options = [m for m in clean if m.name not in spent and trim.stock_left_kg(m) > 0
                       and m.yield_pct(symbol) < m.mass_yield * target]
            if not options:
                trim.note(f"{symbol} is over its maximum and no clean material that lowers it is left in stock")
                continue
            material = options[0]
            needs.append((single_addition_kg(final_kg, now, target, material.composition_pct.get(symbol, 0.0),
                                             material.recovery.get(symbol, 1.0), material.mass_yield), material))
        if not needs:
            break
        kg, material = max(needs, key=lambda need: need[0])
        kg = (math.ceil(kg / material.pack_kg - 1e-9) * material.pack_kg if material.pack_kg
              else _step_up(kg, rules.scrap_step_kg))
        if trim.add(material, max(kg, material.min_kg), final_kg):
            changed = True
        else:
            spent.add(material.name)
        if trim.full:
            break
    return changed


def _raise(trim: _Trim, grade: Grade, symbol: str, alloys: Sequence[Material], rules: HandRules,
           margins_pct: Mapping[str, float], cap_pct: float) -> bool:
    """Bring ``symbol`` up to its aim (mid-window without one), at least the margin inside its
    minimum and at most the margin inside its maximum and ``cap_pct`` (an index's share), with the
    usual alloy; True if anything went in."""
    low, high = grade.window_pct[symbol]
    middle = (low + high) / 2.0
    low = min(low + margins_pct.get(f"{symbol} min", 0.0), middle)
    ceiling = max(high - margins_pct.get(f"{symbol} max", 0.0), middle)
    target = max(min(grade.aim_pct.get(symbol, middle), ceiling, cap_pct), low)
    if symbol == "Mn" and "Si" in grade.window_pct:
        si_low = grade.window_pct["Si"][0] + margins_pct.get("Si min", 0.0)
        if trim.predicted(trim.low_analysis)[1].get("Si", 0.0) < si_low:  # both short: silicomanganese first
            alloys = sorted(alloys, key=lambda m: m.yield_pct("Si") <= 0)
    changed = False
    for material in alloys:
        final_kg, pct = trim.predicted(trim.low_analysis)
        now = pct.get(symbol, 0.0)
        if now >= low and target - now <= rules.aim_band * (high - low):
            return changed
        if trim.stock_left_kg(material) <= 0:
            continue
        content, recovery = material.composition_pct[symbol], material.recovery.get(symbol, 1.0)
        if recovery * content <= material.mass_yield * target:
            continue  # too lean to reach the aim: its own dilution outweighs what it brings
        kg = single_addition_kg(final_kg, now, target, content, recovery, material.mass_yield)
        if material.pack_kg:
            packs = math.floor(kg / material.pack_kg + 0.5)  # whole packs to the nearest...
            if now < low:  # ...but never short of the minimum
                to_low = single_addition_kg(final_kg, now, low, content, recovery, material.mass_yield)
                packs = max(packs, math.ceil(to_low / material.pack_kg - 1e-9))
            kg = packs * material.pack_kg
        else:
            kg = _step_up(kg, rules.loose_step_kg)
            if kg < material.min_kg:
                if now >= low:
                    return changed  # not worth weighing out: the heat is in the window
                kg = material.min_kg
        if kg <= 0:
            return changed
        added = trim.add(material, kg, final_kg)
        changed |= added
        if trim.full or (added and trim.stock_left_kg(material) > 0):
            return changed
    if trim.predicted(trim.low_analysis)[1].get(symbol, 0.0) < low:
        trim.note(f"{symbol} is short: no usable alloy carrying it is left in stock" if alloys
                  else f"{symbol} is short: no usable material carries it")
    return changed


def _sheet(heat: Heat, grade: Grade, usable: Sequence[Material], owed_pct: Mapping[str, float], rules: HandRules,
           margins_pct: Mapping[str, float], caps_pct: Mapping[str, float]) -> _Trim:
    """Passes down the sheet until nothing more is needed (or the trim stops)."""
    trim = _Trim(heat, usable, owed_pct)
    clean = sorted((m for m in usable if m.kind == "dilution"), key=lambda m: m.price_per_kg)
    sheet = [(symbol, usual_materials(grade, usable, symbol)) for symbol in sheet_order(grade)]
    for trim.passes in range(1, rules.max_passes + 1):
        changed = _dilute(trim, grade, clean, rules, margins_pct)
        for symbol, alloys in sheet:
            if trim.full:
                break
            changed |= _raise(trim, grade, symbol, alloys, rules, margins_pct, caps_pct.get(symbol, math.inf))
        if not changed or trim.full:
            break
    else:
        trim.note(f"the additions had not settled after {rules.max_passes} passes")
    return trim


def _index_caps(trim: _Trim, grade: Grade, margins_pct: Mapping[str, float],
                caps_pct: Mapping[str, float]) -> dict[str, float] | None:
    """Lower caps on the raised elements of an index over its maximum (less its margin), or None
    when every index is inside.

    The melter checks the carbon equivalent once the sheet is done and, where it is over, aims the
    elements it weighs lower, in the sheet's order (manganese before carbon), each no lower than its
    minimum and margin: the excess taken off the first, what is left off the next.
    """
    pct = trim.predicted(trim.heat.analysis.pct)[1]
    caps = dict(caps_pct)
    for index in grade.indices:
        if index.max_value is None:
            continue
        excess = index.value(pct) - (index.max_value - margins_pct.get(f"{index.name} max", 0.0))
        for symbol in sheet_order(grade):
            weight = index.terms.get(symbol, 0.0)
            if excess <= LIMIT_TOL_PCT or weight <= 0:
                continue
            floor = grade.window_pct[symbol][0] + margins_pct.get(f"{symbol} min", 0.0)
            now = pct.get(symbol, 0.0)
            lowered = max(floor, now - excess / weight)
            if lowered < min(now, caps.get(symbol, math.inf)) - 1e-9:
                caps[symbol] = lowered
                excess -= (now - lowered) * weight
    return None if caps == dict(caps_pct) else caps


def _allowed_drop_c(trim: _Trim, grade: Grade, settings: ShopSettings) -> float | None:
    """The most the additions may cool the bath [°C]: the stage's drop limit and, with a measured
    temperature, what keeps the bath above the liquidus of the planned analysis plus the superheat."""
    allowed = trim.heat.drop_limit_c(settings)
    if trim.heat.temperature_c is not None:
        liquidus = formula_for(grade.family).liquidus_c(trim.predicted(trim.heat.analysis.lowest_pct)[1])
        room = max(trim.heat.temperature_c - liquidus - settings.superheat_c, 0.0)
        allowed = room if allowed is None else min(allowed, room)
    return allowed


def _cool(trim: _Trim, grade: Grade, settings: ShopSettings, rules: HandRules) -> None:
    """Split a trim the bath cannot afford: the same share of every chilling addition now (rounded
    down to packs and the scale's step), the rest after reheating or at the next sample. A
    treatment (the nodulariser) is one reaction and is never split."""
    for _ in range(4):  # the liquidus moves with what is cut: a few rounds settle it
        allowed = _allowed_drop_c(trim, grade, settings)
        used = [(trim.by_name[name], kg) for name, kg in trim.kg.items() if kg > 0]
        drop = temperature_drop_c(trim.heat.bath_kg, used) if used else 0.0
        if allowed is None or drop <= allowed + 1e-6:
            return
        cut = [(m, kg) for m, kg in used if m.chill_per_kg_t > 0 and m.name not in trim.heat.locked_kg
               and m.addition_class != "treatment"]
        kept_c = drop - temperature_drop_c(trim.heat.bath_kg, cut) if cut else drop
        if kept_c >= allowed:
            trim.note("the weighed-out additions alone chill the bath beyond what it may lose")
            if not cut:
                return
        share = max(allowed - kept_c, 0.0) / (drop - kept_c)
        for material, kg in cut:
            step = material.pack_kg or rules.loose_step_kg
            keep = math.floor(kg * share / step + 1e-9) * step if step > 0 else kg * share
            trim.kg[material.name] = keep if keep >= max(material.min_kg, 1e-9) else 0.0
        trim.note("split: the whole trim would chill the bath beyond what it may lose (the rest after "
                  "reheating or at the next sample)")


def hand_plan(heat: Heat, book: RecipeBook, rules: HandRules = HandRules(),
              margins_pct: Mapping[str, float] | None = None) -> HandPlan:
    """Trim ``heat`` the way a melter does by hand (see the module notes), keeping ``margins_pct``
    [wt %] inside each limit by label ("Mn min"). Raises InputError on a bad heat."""
    margins_pct = margins_pct or {}
    validate_heat(heat, book)
    grade = checked_grade(heat, book.grade(heat.grade))
    usable = usable_materials(heat, book)
    owed = contents_owed_pct(heat, grade, book.settings)
    caps: dict[str, float] = {}
    trim = _sheet(heat, grade, usable, owed, rules, margins_pct, caps)
    for _ in range(_INDEX_ROUNDS):
        lowered = _index_caps(trim, grade, margins_pct, caps)
        if lowered is None:
            break
        caps = lowered
        trim = _sheet(heat, grade, usable, owed, rules, margins_pct, caps)
    if caps:
        trim.note("aimed " + ", ".join(sorted(caps)) + " lower to keep the carbon equivalent inside")
    _cool(trim, grade, book.settings, rules)

    used = [(trim.by_name[name], kg) for name, kg in trim.kg.items() if kg > 0]
    final_kg, predicted, checks = recheck(heat, grade, used, book.settings)  # judged exactly as the planner's plans
    additions = [addition(material, kg, heat.material_price_per_kg(material), material.name not in heat.locked_kg)
                 for material, kg in used]
    return HandPlan(
        heat_id=heat.heat_id,
        grade=heat.grade,
        additions=tuple(additions),
        total_cost=math.fsum(a.cost for a in additions),
        bath_kg=heat.bath_kg,
        final_kg=final_kg,
        predicted_pct=predicted,
        checks=checks,
        passes=trim.passes,
        temperature_drop_c=temperature_drop_c(heat.bath_kg, used) if used else 0.0,
        notes=tuple(trim.notes),
        currency=book.settings.currency,
    )
