"""Why a limit cannot be met, in plain words with figures (DESIGN §2, "closest achievable plan")."""

from __future__ import annotations

from collections.abc import Sequence

from meltfix.heat import Heat
from meltfix.recipes import Material, RecipeBook

# Elements refining cannot take out of liquid steel: only dilution lowers them (common practice).
UNREMOVABLE = frozenset({"Cu", "Ni", "Mo", "Sn", "As", "Sb", "Co", "W"})


def explain_violation(element: str, limit: str, heat: Heat, book: RecipeBook, usable: Sequence[Material],
                      used: Sequence[tuple[Material, float]], final_kg: float, packs: bool,
                      temperature_drop_c: float = 0.0, drop_limit_c: float | None = None) -> str:
    """One sentence saying why ``element`` misses its ``limit`` ("min" or "max") in the closest plan."""
    grade = book.grade(heat.grade)
    if element not in grade.window_pct:
        return f"{element} cannot be brought inside its limit together with the other limits."
    low, high = grade.window_pct[element]
    now = heat.analysis.get(element)
    free_kg = None if heat.capacity_kg is None else heat.capacity_kg - heat.bath_kg
    added_kg = sum(kg for _, kg in used)
    if limit == "min":
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
            return (f"{element} is short because the vessel is full: all {free_kg:,.0f} kg of free capacity "
                    "is used.")
        if drop_limit_c is not None and temperature_drop_c >= drop_limit_c - 0.05:
            return (f"{element} is short because more additions would chill the bath beyond the "
                    f"{drop_limit_c:g} °C the heat may lose.")
        exhausted = [m.name for m, kg in used if m in stocked and heat.material_stock_kg(m) is not None
                     and kg >= heat.material_stock_kg(m) - 1e-6]
        if exhausted and len(exhausted) >= len([m for m in stocked if heat.material_stock_kg(m) is not None]):
            return f"{element} is short because the stock of {', '.join(exhausted)} is used up."
        if packs:
            return (f"{element} cannot land inside {low:g}–{high:g} % with whole packs, or raising it would push "
                    "another element out; try the plan with loose amounts.")
        return (f"Raising {element} to {low:g} % with the stocked materials would push another element over "
                "its limit.")
    # Above a maximum: additions can only dilute.
    remedy = ("it cannot be refined out, only diluted or the heat re-graded" if element in UNREMOVABLE
              else "additions can only dilute it; in the furnace, oxidation is the remedy")
    if now <= high:
        return (f"{element} rises above {high:g} % because the additions the other elements need carry "
                f"{element} in; {remedy}.")
    needed_kg = heat.bath_kg * (now / high - 1.0)
    clean = [m for m in usable if m.kind == "dilution" and m.composition_pct.get(element, 0.0) < high]
    figures = f"{element} is {now:g} % against a maximum of {high:g} %: it needs about {needed_kg:,.0f} kg of clean material"
    if not clean:
        elsewhere = _other_stages(heat, book, [m for m in book.materials if m.kind == "dilution"
                                         and m.composition_pct.get(element, 0.0) < high])
        if elsewhere:
            return f"{figures}, but none may go in at the {heat.stage}: dilution needs the {elsewhere}; {remedy}."
        return f"{figures}, but no clean dilution material is usable; {remedy}."
    if free_kg is not None and needed_kg > free_kg:
        return f"{figures} but only {free_kg:,.0f} kg of capacity is free; {remedy}."
    stock = [heat.material_stock_kg(m) for m in clean]
    if all(s is not None for s in stock) and needed_kg > sum(stock):  # type: ignore[arg-type]
        return f"{figures} but only {sum(stock):,.0f} kg of clean material is in stock; {remedy}."  # type: ignore[arg-type]
    return f"{figures} ({added_kg:,.0f} kg is all the plan can add within its limits); {remedy}."


def _other_stages(heat: Heat, book: RecipeBook, materials: Sequence[Material]) -> str:
    """The stages other than the heat's where some of ``materials`` may go, in words ("furnace"),
    in the shop's order; empty when none of them is barred from the heat's stage."""
    barred = {s for m in materials if not m.allowed_at(heat.stage) for s in m.stages or ()}
    return " or the ".join(s for s in book.settings.stages if s in barred)
