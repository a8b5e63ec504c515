"""A seeded population of heats over the demo shop's grades, for the benchmarks.

Each heat is a first sample after melt-down: contents drawn around the chemistry the shop usually
sees at that point for the grade (log-normal around a median, so contents stay positive and scrap
residuals get the long upper tail they have in practice), a bath weight around the route's usual
heat, the vessel the route uses (so the free capacity varies with the bath) and the store's stock
on the day. All figures are the invented demo shop's, chosen to look like ordinary melt-shop
practice (common practice, no published source); none is a standard's value.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import RecipeBook


@dataclass(frozen=True)
class Route:
    """How the shop makes one grade: its share of heats, bath and vessel, first-sample chemistry."""

    share: float
    """Share of the shop's heats [0..1, relative to the other routes]."""
    bath_t: float
    """Usual liquid bath at the first sample [t]."""
    vessel_t: float
    """Most liquid the ladle or furnace holds [t]."""
    first_sample: Mapping[str, tuple[float, float]]
    """Element -> (median [wt %], log-normal spread [relative sd]); spread 0 = below detection."""


# Residuals from bought scrap, shared by the plain carbon and low-alloy routes (common practice:
# Cu 0.1-0.3 %, Ni, Cr, Mo below 0.1 % with a tail, Sn about 0.01 %).
_SCRAP = {"P": (0.013, 0.30), "S": (0.018, 0.35), "Cr": (0.09, 0.40), "Ni": (0.08, 0.40), "Mo": (0.02, 0.45),
          "Cu": (0.16, 0.33), "Sn": (0.010, 0.40), "N": (0.0065, 0.20)}

ROUTES: dict[str, Route] = {
    "SAE 1045": Route(0.18, 60, 65, {**_SCRAP, "C": (0.40, 0.10), "Si": (0.15, 0.30), "Mn": (0.50, 0.18),
                                     "Al": (0.020, 0.40)}),
    "SAE 1020": Route(0.13, 45, 48, {**_SCRAP, "C": (0.16, 0.14), "Si": (0.12, 0.30), "Mn": (0.33, 0.22),
                                     "Al": (0.020, 0.40)}),
    "A36 plate to 20 mm": Route(0.11, 110, 118, {**_SCRAP, "C": (0.15, 0.18), "Si": (0.08, 0.45),
                                                 "Mn": (0.75, 0.15), "Al": (0.010, 0.50)}),
    "S355J2": Route(0.15, 110, 118, {**_SCRAP, "C": (0.14, 0.14), "Si": (0.08, 0.40), "Mn": (1.05, 0.12),
                                     "S": (0.012, 0.30), "Al": (0.006, 0.50)}),
    "SAE 4140": Route(0.10, 80, 85, {**_SCRAP, "C": (0.35, 0.08), "Si": (0.17, 0.25), "Mn": (0.62, 0.12),
                                     "Cr": (0.72, 0.10), "Mo": (0.12, 0.20), "Cu": (0.14, 0.33),
                                     "Al": (0.025, 0.30)}),
    "SAE 4340": Route(0.06, 90, 96, {**_SCRAP, "C": (0.37, 0.06), "Si": (0.20, 0.25), "Mn": (0.58, 0.10),
                                     "Cr": (0.66, 0.08), "Ni": (1.58, 0.04), "Mo": (0.17, 0.12),
                                     "Cu": (0.12, 0.33), "Al": (0.030, 0.30)}),
    "SAE 8620": Route(0.08, 80, 85, {**_SCRAP, "C": (0.17, 0.10), "Si": (0.18, 0.25), "Mn": (0.68, 0.10),
                                     "Cr": (0.40, 0.10), "Ni": (0.42, 0.08), "Mo": (0.13, 0.15),
                                     "Cu": (0.15, 0.33), "Al": (0.025, 0.30)}),
    "52100": Route(0.04, 60, 64, {**_SCRAP, "C": (0.90, 0.05), "Si": (0.20, 0.25), "Mn": (0.28, 0.15),
                                  "Cr": (1.30, 0.06), "Cu": (0.12, 0.33), "S": (0.008, 0.30),
                                  "Al": (0.020, 0.40)}),
    # Stainless after decarburisation: chromium and nickel come mostly from the charge.
    "304": Route(0.06, 60, 64, {"C": (0.045, 0.20), "Si": (0.38, 0.20), "Mn": (1.35, 0.10), "P": (0.028, 0.15),
                                "S": (0.006, 0.30), "Cr": (17.85, 0.012), "Ni": (7.95, 0.02), "Mo": (0.25, 0.30),
                                "Cu": (0.35, 0.30), "N": (0.048, 0.15)}),
    # Ductile-iron base from the induction furnace, before magnesium treatment.
    "Ductile 65-45-12": Route(0.09, 22, 25, {"C": (3.55, 0.03), "Si": (1.85, 0.05), "Mn": (0.22, 0.20),
                                             "P": (0.025, 0.30), "S": (0.010, 0.30), "Cr": (0.04, 0.40),
                                             "Ni": (0.03, 0.40), "Cu": (0.08, 0.40), "Mg": (0.001, 0.0)}),
}

_UNREPORTED_PCT = 0.005
"""An element a grade limits but the route does not list is reported below this detection limit
[wt %] (a residual nobody adds; common practice for a spark spectrometer's lower limits)."""
_BATH_SPREAD = 0.03
"""Relative sd of the tapped bath around the route's usual heat (log-normal)."""
_LEAST_FREE = 0.01
"""Nobody taps more than the vessel takes less this freeboard [fraction of the vessel]."""
# The store's usual holding [kg]; the recipe book's stock is one day's figure (a material not
# listed here keeps it as its usual holding).
STORE_KG: dict[str, float] = {
    "HC FeMn": 6000, "MC FeMn": 1500, "LC FeMn": 600, "SiMn": 5000, "FeSi 75": 3000, "FeSi 50": 2000,
    "FeSi 75 inoculant": 600, "MgFeSi 6": 1500, "HC FeCr": 2500, "LC FeCr": 1500, "FeMo 65": 400,
    "FeV 80": 150, "FeNb 65": 100, "FeTi 70": 200, "FeB 18": 50, "Nickel": 1500, "Copper": 400,
    "Aluminium shot": 800, "Aluminium wire": 1000, "Carbon raiser (graphitised)": 2000,
    "Clean plate scrap": 8000, "Clean bales": 6000, "Pig iron": 10000,
}
_STOCK_RANGE = (0.4, 1.4)
"""The day's stock of each material, as a multiple of the store's usual holding (uniform)."""
_OUT_OF_STOCK = 0.04
"""Chance that a material is out of stock on the day."""


def population(book: RecipeBook, n_heats: int, seed: int) -> list[Heat]:
    """``n_heats`` first samples over the book's grades that have a route, the same for the same seed."""
    routes = {name: route for name, route in ROUTES.items() if name in book.grades}
    if not routes:
        raise ValueError("none of the recipe book's grades has a route in bench/population.py")
    rng = np.random.default_rng(seed)
    names = list(routes)
    shares = np.array([routes[name].share for name in names])
    picks = rng.choice(len(names), size=n_heats, p=shares / shares.sum())
    # The day's stock for every heat: a share of the store's usual holding, now and then none.
    factor = rng.uniform(*_STOCK_RANGE, size=(n_heats, len(book.materials)))
    factor[rng.random(factor.shape) < _OUT_OF_STOCK] = 0.0
    heats = []
    for index, pick in enumerate(picks):
        name = names[pick]
        route = routes[name]
        symbols = list(route.first_sample)
        median = np.array([route.first_sample[s][0] for s in symbols])
        spread = np.array([route.first_sample[s][1] for s in symbols])
        pct = np.round(median * np.exp(spread * rng.standard_normal(len(symbols))), 4)
        below = frozenset(s for s, (_, sd) in route.first_sample.items() if sd == 0)
        unreported = sorted(book.grade(name).needed_elements - set(symbols))
        symbols += unreported
        pct = np.append(pct, [_UNREPORTED_PCT] * len(unreported))
        below |= frozenset(unreported)
        capacity_kg = route.vessel_t * 1000.0
        bath_kg = min(round(route.bath_t * 1000.0 * float(np.exp(_BATH_SPREAD * rng.standard_normal())), -1),
                      capacity_kg * (1.0 - _LEAST_FREE))
        stock = {m.name: round(STORE_KG.get(m.name, m.stock_kg) * float(factor[index, j]))
                 for j, m in enumerate(book.materials) if m.stock_kg is not None}
        heats.append(Heat(
            heat_id=f"P{seed}-{index + 1:05d}",
            grade=name,
            bath_kg=bath_kg,
            analysis=Analysis(dict(zip(symbols, pct.tolist())), below),
            capacity_kg=capacity_kg,
            stock_kg=stock,
        ))
    return heats
