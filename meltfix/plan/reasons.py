"""Why a limit cannot be met, in plain words with figures: the reasons of the closest achievable plan.

An element over its maximum comes down by a route that depends on the element and on where the
heat is (:data:`REMEDIES`). The routes are the refining reactions of steelmaking as recalled from
memory (as taught in texts such as Turkdogan, Fundamentals of Steelmaking, 1996; not re-read):
oxygen removes C, Si, Mn (and Cr, Al, Ti, V, Nb, B) as oxides or CO; phosphorus leaves only under
a basic, oxidising slag; sulphur only under a basic, reducing slag with stirring, or with calcium,
never by oxidation; Cu, Ni, Mo, Sn and the like are less oxidisable than iron and only dilution
lowers them; nitrogen and hydrogen leave with a carbon boil or under vacuum.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType

from meltfix.plan.numbers import content_text, degrees_text, limit_text, mass_text, with_unit
from meltfix.shop.heat import Heat
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook


@dataclass(frozen=True)
class Remedy:
    """How an element over its maximum comes down at one stage."""

    routes: frozenset[str]
    """What does it, from :data:`ROUTES`."""
    text: str
    """The advice, a clause to follow "; " in a reason."""


ROUTES = ("oxidation", "basic oxidising slag", "basic reducing slag", "stirring", "calcium treatment",
          "carbon boil", "vacuum degassing", "fade", "dilution", "back to the furnace")
"""Every way an element comes down that a remedy may name."""

_FURNACE, _LADLE, _LF = "furnace", "ladle", "lf"


def _remedy(text: str, *routes: str) -> Remedy:
    return Remedy(frozenset(routes), text)


def _oxidisable(symbol: str) -> Mapping[str, Remedy]:
    """An element oxygen takes out: in the furnace by blowing; later only dilution or the furnace again."""
    later = _remedy(f"nothing at a ladle takes {symbol} out: dilute it, take the heat back to the furnace, or "
                    "re-grade it", "dilution", "back to the furnace")
    return {_FURNACE: _remedy(f"an oxygen blow oxidises {symbol} into the slag (or dilute it)",
                              "oxidation", "dilution"),
            _LADLE: later, _LF: later}


def _dilution_only(symbol: str) -> Mapping[str, Remedy]:
    only = _remedy(f"{symbol} is less oxidisable than iron and cannot be refined out, only diluted or the heat "
                   "re-graded", "dilution")
    return {_FURNACE: only, _LADLE: only, _LF: only}


def _desulphurise() -> Mapping[str, Remedy]:
    in_ladle = ("sulphur comes out under a basic, reducing slag (lime-rich, low in iron oxide, the steel fully "
                "deoxidised) with argon stirring, or by calcium treatment")
    return {_FURNACE: _remedy("oxidation takes out little sulphur: desulphurise at the ladle under a basic, reducing "
                              "slag with stirring, or by calcium treatment; here only dilution lowers it",
                              "basic reducing slag", "stirring", "calcium treatment", "dilution"),
            _LADLE: _remedy(f"{in_ladle} (or dilute it)", "basic reducing slag", "stirring", "calcium treatment",
                            "dilution"),
            _LF: _remedy(f"at the ladle furnace {in_ladle} (or dilute it)", "basic reducing slag", "stirring",
                         "calcium treatment", "dilution")}


def _dephosphorise() -> Mapping[str, Remedy]:
    later = _remedy("a ladle's reducing slag cannot take phosphorus out (it reverts from the slag): dilute it, take "
                    "the heat back to the furnace, or re-grade it", "dilution", "back to the furnace")
    return {_FURNACE: _remedy("phosphorus leaves under a basic, oxidising slag (lime with iron oxide, the bath not "
                              "too hot), slagged off before deoxidation so it does not revert (or dilute it)",
                              "basic oxidising slag", "dilution"),
            _LADLE: later, _LF: later}


def _degas(symbol: str) -> Mapping[str, Remedy]:
    vacuum = _remedy(f"vacuum degassing (at a degasser) lowers {symbol} (or dilute it)", "vacuum degassing",
                     "dilution")
    return {_FURNACE: _remedy(f"a carbon boil (decarburising with oxygen) flushes {symbol} out (or dilute it)",
                              "carbon boil", "dilution"),
            _LADLE: vacuum, _LF: vacuum}


def _magnesium() -> Mapping[str, Remedy]:
    fade = _remedy("magnesium fades with holding time (it boils off and oxidises); dilute with untreated base iron",
                   "fade", "dilution")
    return {_FURNACE: fade, _LADLE: fade, _LF: fade}


REMEDIES: Mapping[str, Mapping[str, Remedy]] = MappingProxyType({
    **{s: _oxidisable(s) for s in ("C", "Si", "Mn", "Cr", "Al", "Ti", "V", "Nb", "B")},
    "P": _dephosphorise(),
    "S": _desulphurise(),
    **{s: _degas(s) for s in ("N", "H")},
    "Mg": _magnesium(),
    **{s: _dilution_only(s) for s in ("Cu", "Ni", "Mo", "Sn", "As", "Sb", "Co", "W")},
})
"""Element -> stage (the built-in stages: furnace, ladle, lf for the ladle furnace) -> remedy."""


def remedy(element: str, stage: str) -> Remedy:
    """How ``element`` over its maximum comes down at ``stage``. A stage the table does not know
    gets the furnace's and the ladle's remedies side by side; an element it does not know, dilution."""
    by_stage = REMEDIES.get(element)
    if by_stage is None:
        return _remedy(f"additions can only dilute {element}", "dilution")
    if stage in by_stage:
        return by_stage[stage]
    furnace, ladle = by_stage[_FURNACE], by_stage[_LADLE]
    if furnace == ladle:
        return furnace
    return Remedy(furnace.routes | ladle.routes, f"in a furnace, {furnace.text}; in a ladle, {ladle.text}")


def explain_violation(element: str, limit: str, heat: Heat, book: RecipeBook, usable: Sequence[Material],
                      used: Sequence[tuple[Material, float]], final_kg: float, packs: bool,
                      temperature_drop_c: float = 0.0, drop_limit_c: float | None = None) -> str:
    """One sentence saying why ``element`` misses its ``limit`` ("min" or "max") in the closest plan."""
    grade = book.grade(heat.grade)
    if element not in grade.window_pct:
        return f"{element} cannot be brought inside its limit together with the other limits."
    if limit == "min":
        return _short_of_min(element, heat, book, usable, used, final_kg, packs, temperature_drop_c, drop_limit_c)
    return _over_max(element, heat, book, usable, used)


def _pct(symbol: str, pct: float) -> str:
    """A limit or content in a sentence, as every output writes it."""
    return with_unit(symbol, limit_text(symbol, pct))


def _short_of_min(element: str, heat: Heat, book: RecipeBook, usable: Sequence[Material],
                  used: Sequence[tuple[Material, float]], final_kg: float, packs: bool,
                  temperature_drop_c: float, drop_limit_c: float | None) -> str:
    low, high = book.grade(heat.grade).window_pct[element]
    free_kg = None if heat.capacity_kg is None else heat.capacity_kg - heat.bath_kg
    # A carrier must bring more of the element than the bath needs: scrap with 0.005 % Mo
    # does not raise Mo to 0.15 %.
    carriers = [m for m in usable if m.yield_pct(element) > low]
    if not carriers:
        anywhere = [m.name for m in book.materials if m.yield_pct(element) > low]
        if not anywhere:
            return f"No material in the recipe book carries {element}."
        elsewhere = _other_stages(heat, book, [m for m in book.materials if m.yield_pct(element) > low])
        if elsewhere:
            return (f"No material that carries {element} may go in at the {heat.stage}: raising it needs "
                    f"the {elsewhere}.")
        return (f"No usable material carries {element} (those that do are switched off or forbidden "
                f"for this grade: {', '.join(anywhere)}).")
    stocked = [m for m in carriers if heat.material_stock_kg(m) != 0]
    if not stocked:
        verb = "is" if len(carriers) == 1 else "are"
        return f"No stocked material carries {element}: {', '.join(m.name for m in carriers)} {verb} out of stock."
    if free_kg is not None and final_kg - heat.bath_kg >= free_kg - 1.0:
        return (f"{element} is short because the vessel is full: all {mass_text(free_kg, book.settings.units)} of free capacity "
                "is used.")
    if drop_limit_c is not None and temperature_drop_c >= drop_limit_c - 0.05:
        return (f"{element} is short because more additions would chill the bath beyond the "
                f"{degrees_text(drop_limit_c, book.settings.units)} the heat may lose.")
    exhausted = [m.name for m, kg in used if m in stocked
                 and (on_hand := heat.material_stock_kg(m)) is not None and kg >= on_hand - 1e-6]
    if exhausted and len(exhausted) >= len([m for m in stocked if heat.material_stock_kg(m) is not None]):
        return f"{element} is short because the stock of {', '.join(exhausted)} is used up."
    if packs:
        return (f"{element} cannot land inside {limit_text(element, low)}–{_pct(element, high)} with whole "
                "packs, or raising it would push another element out; try the plan with loose amounts.")
    return (f"Raising {element} to {_pct(element, low)} with the stocked materials would push another element "
            "over its limit.")


def _over_max(element: str, heat: Heat, book: RecipeBook, usable: Sequence[Material],
              used: Sequence[tuple[Material, float]]) -> str:
    """Above a maximum additions can only dilute; the remedy says what else would work here."""
    high = book.grade(heat.grade).window_pct[element][1]
    now = heat.analysis.get(element)
    free_kg = None if heat.capacity_kg is None else heat.capacity_kg - heat.bath_kg
    advice = remedy(element, heat.stage).text
    if now <= high:
        return (f"{element} rises above {_pct(element, high)} because the additions the other elements need "
                f"carry {element} in; {advice}.")
    needed_kg = heat.bath_kg * (now / high - 1.0)
    clean = [m for m in usable if m.kind == "dilution" and m.composition_pct.get(element, 0.0) < high]
    figures = (f"{element} is {with_unit(element, content_text(element, now))} against a maximum of "
               f"{_pct(element, high)}: it needs about {mass_text(needed_kg, book.settings.units)} of clean material")
    if not clean:
        elsewhere = _other_stages(heat, book, [m for m in book.materials if m.kind == "dilution"
                                         and m.composition_pct.get(element, 0.0) < high])
        if elsewhere:
            return f"{figures}, but none may go in at the {heat.stage}: dilution needs the {elsewhere}; {advice}."
        return f"{figures}, but no clean dilution material is usable; {advice}."
    if free_kg is not None and needed_kg > free_kg:
        return f"{figures} but only {mass_text(free_kg, book.settings.units)} of capacity is free; {advice}."
    stocks = [heat.material_stock_kg(m) for m in clean]
    in_stock = math.fsum(s for s in stocks if s is not None)
    if None not in stocks and needed_kg > in_stock:
        return f"{figures} but only {mass_text(in_stock, book.settings.units)} of clean material is in stock; {advice}."
    added_kg = sum(kg for _, kg in used)
    return f"{figures} ({mass_text(added_kg, book.settings.units)} is all the plan can add within its limits); {advice}."


def _other_stages(heat: Heat, book: RecipeBook, materials: Sequence[Material]) -> str:
    """The stages other than the heat's where some of ``materials`` may go, in words ("furnace"),
    in the shop's order; empty when none of them is barred from the heat's stage."""
    barred = {s for m in materials if not m.allowed_at(heat.stage) for s in m.stages or ()}
    return " or the ".join(s for s in book.settings.stages if s in barred)
