"""The demo shop's logbook: a week of invented heats at Kestrel Bend Foundry & Steel (an invented shop).

Every heat is made the way the logbook would see it on a real shift: a first sample (two or three
burns), a plan from :mod:`meltfix.plan.planner`, the additions the crew actually made (mostly the plan,
sometimes a cautious part of it, a heavy hand, a substitute material or a skipped bag), then the
next sample. The "true" bath behind the samples uses recoveries and a bath weight that differ from
the recipe book's, so the prediction is sometimes wrong and a heat needs a second or third
correction, as in practice. A fixed seed makes the logbook the same on every machine.

The logbook is built on first use into the user's cache folder (it takes a few seconds) rather
than shipped: the repository ignores ``*.sqlite`` files, a binary copy would go stale whenever the
recipe book changes, and the cache file's name carries a fingerprint of the recipe book so a
changed book rebuilds it.
"""

from __future__ import annotations

import hashlib
import os
import sys
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from datetime import datetime, timedelta
from pathlib import Path
from types import MappingProxyType

import numpy as np

from meltfix import __version__
from meltfix.base.errors import InputError
from meltfix.base.paths import cache_dir
from meltfix.plan.massbalance import bath_after
from meltfix.plan.result import Plan
from meltfix.records.logbook import SCHEMA_VERSION, Logbook
from meltfix.shop.analysis import Analysis
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook, load_recipes

SEED = 20260302
DEMO_VERSION = 1  # bump when the generator changes, so cached logbooks are rebuilt
WEEK_START = datetime(2026, 3, 2, 6, 0)  # a Monday, 06:00: the first early shift of the demo week
DAYS = 7
SHIFT_HOURS = 8
MAX_CORRECTIONS = 3
FIRST_HEAT_NUMBER = 26001


@dataclass(frozen=True)
class _Route:
    """How the demo shop makes one grade: share of the heats, vessel and start conditions."""

    share: float
    bath_kg: float
    capacity_kg: float
    temperature_c: float
    start_pct: Mapping[str, tuple[float, float]] = field(default_factory=dict)
    """Element -> (low, high) wt % at the first sample, where the generic rule would be wrong."""
    below_limit: frozenset[str] = frozenset()
    """Elements the first sample reports below the detection limit."""


# Invented routes. Heat sizes follow the demo heat files (60–110 t ladles, a 22 t iron ladle).
_ROUTES = {
    "SAE 1045": _Route(0.16, 60_000, 65_000, 1595),
    "S355J2": _Route(0.16, 110_000, 118_000, 1610),
    "A36 plate to 20 mm": _Route(0.12, 110_000, 118_000, 1610),
    "SAE 1020": _Route(0.10, 45_000, 48_000, 1625),
    "SAE 4140": _Route(0.10, 80_000, 85_000, 1600),
    "SAE 8620": _Route(0.08, 80_000, 85_000, 1600),
    "SAE 4340": _Route(0.06, 90_000, 96_000, 1605),
    "52100": _Route(0.05, 60_000, 65_000, 1590),
    "304": _Route(0.07, 60_000, 64_000, 1580),
    # Base iron from the induction furnace: silicon left low because the nodulariser brings silicon.
    "Ductile 65-45-12": _Route(0.10, 22_000, 25_000, 1500,
                               MappingProxyType({"Si": (1.75, 1.95), "C": (3.50, 3.62), "Mg": (0.001, 0.001)}),
                               frozenset({"Mg"})),
}
_RESIDUALS = {"Sn": (0.004, 0.014)}  # tramp elements in the analysis although no window lists them
# Residuals a carbon equivalent reads although the grade sets them no window (invented, typical of
# scrap-based steel): the analysis reports them, as the planner needs every element a limit reads.
_INDEX_RESIDUALS = {"Cr": (0.02, 0.10), "Ni": (0.02, 0.10), "Mo": (0.005, 0.02), "V": (0.001, 0.004),
                    "Cu": (0.05, 0.20), "P": (0.015, 0.035)}
# What the crew takes when the planned bin is empty or out of reach (invented), and the element swapped for.
_SWAPS = {"HC FeMn": ("SiMn", "MC FeMn"), "MC FeMn": ("HC FeMn",), "SiMn": ("HC FeMn",),
          "HC FeCr": ("LC FeCr",), "LC FeCr": ("HC FeCr",), "Aluminium wire": ("Aluminium shot",),
          "Clean plate scrap": ("Clean bales",)}
_SWAPS_FOR = {"HC FeMn": "Mn", "MC FeMn": "Mn", "SiMn": "Mn", "HC FeCr": "Cr", "LC FeCr": "Cr",
              "Aluminium wire": "Al", "Clean plate scrap": "Fe"}


def _round_pct(value: float) -> float:
    """Round as a spectrometer printout does: 2 decimals above 10 %, 3 above 0.1 %, else 4."""
    digits = 2 if value >= 10 else 3 if value >= 0.1 else 4
    return round(float(value), digits)


class _DemoShop:
    """Generates the week; one instance, one random stream, so the result depends only on the seed."""

    def __init__(self, book: RecipeBook, logbook: Logbook, days: int) -> None:
        self.book = book
        self.days = days
        self.logbook = logbook
        from meltfix.plan.planner import Planner  # SciPy only when building, not when the week is cached

        self.planner = Planner(book)
        self.rng = np.random.default_rng(SEED)
        # Residuals only an index reads draw from their own stream, so the rest of the invented
        # week does not depend on which residuals a grade's carbon equivalent lists.
        self.trace_rng = np.random.default_rng(SEED + 1)
        self.traces: frozenset[str] = frozenset()
        self.routes = {name: route for name, route in _ROUTES.items() if name in book.grades}
        if not self.routes:
            raise ValueError("the recipe book has none of the demo shop's grades")

    # -- the week ---------------------------------------------------------------------------
    def run(self) -> int:
        names = list(self.routes)
        shares = np.array([self.routes[n].share for n in names])
        shares /= shares.sum()
        number = FIRST_HEAT_NUMBER
        for shift in range(self.days * 24 // SHIFT_HOURS):
            start = WEEK_START + timedelta(hours=SHIFT_HOURS * shift)
            count = int(self.rng.integers(3, 5))  # three or four heats a shift
            for k in range(count):
                offset_min = (SHIFT_HOURS * 60 / count) * k + float(self.rng.uniform(5, 25))
                grade = names[int(self.rng.choice(len(names), p=shares))]
                self._heat(f"KB-{number}", grade, start + timedelta(minutes=offset_min))
                number += 1
        return number - FIRST_HEAT_NUMBER

    # -- one heat ---------------------------------------------------------------------------
    def _heat(self, heat_id: str, grade_name: str, when: datetime) -> None:
        rng = self.rng
        grade = self.book.grade(grade_name)
        route = self.routes[grade_name]
        true_kg = route.bath_kg * float(rng.normal(1.0, 0.02))  # the crane scale is not exact
        recorded_kg = route.bath_kg
        true_pct = self._tap_analysis(grade, route)
        self.traces = frozenset({s for index in grade.indices for s in index.terms} - set(grade.window_pct))
        temperature = route.temperature_c + float(rng.normal(0, 6))
        # Real recoveries of this heat: the book's, times a factor per material (slag, oxygen, stirring).
        factors = {m.name: float(np.clip(rng.normal(0.98, 0.03), 0.85, 1.05)) for m in self.book.materials}
        behaviour = rng.choice(["plan", "cautious", "heavy", "substitute", "skip"], p=[0.6, 0.15, 0.1, 0.1, 0.05])

        sample_no = 1
        elements = tuple(true_pct)
        reading = self._sample(heat_id, sample_no, true_pct, elements, route.below_limit, when, temperature)
        for correction in range(MAX_CORRECTIONS):
            heat = Heat(heat_id, grade_name, recorded_kg, reading, capacity_kg=route.capacity_kg,
                        temperature_c=round(temperature), stage=self.book.settings.heat_stage)
            plan = self.planner.plan(heat)
            when += timedelta(minutes=float(rng.uniform(2, 4)))
            plan_id = self.logbook.record_plan(heat, plan, when)
            # A plan that can only dilute an element over its maximum is not followed: the heat goes
            # back to the furnace or is re-graded, outside what the logbook records.
            if not plan.additions or any(v.limit == "max" for v in plan.violations):
                return
            actual = self._actual(plan, behaviour if correction == 0 else "plan")
            when += timedelta(minutes=float(rng.uniform(2, 5)))
            self.logbook.record_additions(heat_id, [(m.name, kg) for m, kg in actual], plan_id, when)
            true_kg, true_pct = bath_after(true_kg, true_pct, [(self._as_really(m.at_stage(heat.stage), factors), kg)
                                                         for m, kg in actual])
            recorded_kg, _ = bath_after(recorded_kg, reading.pct, actual)
            temperature -= plan.temperature_drop_c + float(rng.uniform(4, 9))  # plus ladle losses while stirring
            when += timedelta(minutes=float(rng.uniform(6, 12)))
            sample_no += 1
            reading = self._sample(heat_id, sample_no, true_pct, elements, frozenset(), when, temperature)
            if self._done(grade, reading):
                return

    def _tap_analysis(self, grade: Grade, route: _Route) -> dict[str, float]:
        """The bath at the first sample: alloying elements short of their aim, residuals well inside."""
        rng = self.rng
        pct: dict[str, float] = {}
        for symbol, (low, high) in grade.window_pct.items():
            if symbol in route.start_pct:
                lo, hi = route.start_pct[symbol]
                pct[symbol] = float(rng.uniform(lo, hi))
                continue
            aim = grade.aim_pct.get(symbol)
            if aim is None and low > 0:
                aim = (low + high) / 2
            if aim is None:  # a maximum only: a residual
                pct[symbol] = high * float(rng.uniform(0.15, 0.6))
            elif aim >= 5:  # a high-alloy element: nearly there after the converter
                pct[symbol] = aim * float(rng.uniform(0.965, 0.995))
            elif aim >= 0.9:  # mostly charged in the furnace, trimmed in the ladle
                pct[symbol] = aim * float(rng.uniform(0.85, 0.97))
            else:
                pct[symbol] = aim * float(rng.uniform(0.5, 0.95))
        for symbol in sorted({s for index in grade.indices for s in index.terms} - set(pct)):
            lo, hi = _INDEX_RESIDUALS[symbol]
            pct[symbol] = float(self.trace_rng.uniform(lo, hi))
        for symbol, (lo, hi) in _RESIDUALS.items():
            pct.setdefault(symbol, float(rng.uniform(lo, hi)))
        return pct

    def _sample(self, heat_id: str, number: int, true_pct: dict[str, float], elements: Sequence[str],
                below: frozenset[str], when: datetime, temperature_c: float) -> Analysis:
        """Spark two burns (a third when two disagree), record them, return the averaged analysis.

        ``elements`` are those the shop's analysis programme reports (the bath holds traces of more).
        """
        rng = self.rng
        true_pct = {s: true_pct.get(s, 0.0) for s in elements}
        burns = [self._burn(true_pct, below) for _ in range(2)]
        rejected: set[int] = set()
        flags: list[str] = []
        if rng.random() < 0.12:  # a pore or an inclusion under the spark
            symbol = str(rng.choice([s for s in ("C", "S", "Si", "Mn") if s in true_pct and s not in below]))
            pct = dict(burns[1].pct)
            pct[symbol] = _round_pct(pct[symbol] * 1.12)
            burns[1] = Analysis(pct, burns[1].below_limit)
            burns.append(self._burn(true_pct, below))
            rejected.add(2)
            flags.append(f"burn 2 disagreed on {symbol}; burn 3 sparked and burn 2 left out")
        accepted = [b for k, b in enumerate(burns, 1) if k not in rejected]
        average = {s: _round_pct(sum(b.pct[s] for b in accepted) / len(accepted)) for s in elements}
        analysis = Analysis(average, below)
        self.logbook.record_sample(heat_id, f"S{number}", analysis, burns, when, rejected_burns=rejected,
                                   temperature_c=round(temperature_c), flags=flags)
        return analysis

    def _burn(self, true_pct: dict[str, float], below: frozenset[str]) -> Analysis:
        # Repeatability about 1 % relative (common practice for spark OES on low-alloy steel).
        main = [s for s in true_pct if s not in self.traces]
        noise = dict(zip(main, self.rng.normal(1.0, 0.01, len(main)), strict=True))
        noise.update((s, float(self.trace_rng.normal(1.0, 0.01))) for s in true_pct if s in self.traces)
        pct = {s: (v if s in below else _round_pct(max(v * noise[s], 0.0))) for s, v in true_pct.items()}
        return Analysis(pct, below)

    def _done(self, grade: Grade, reading: Analysis) -> bool:
        """The shop's rule: stop trimming when every element is inside its window and the aimed
        ones are within two thirds of the way from the aim to the nearer limit (invented practice)."""
        for symbol, (low, high) in grade.window_pct.items():
            value = reading.get(symbol)
            if not low <= value <= high:
                return False
            aim = grade.aim_pct.get(symbol)
            if aim is not None:
                room = (aim - low) if value < aim else (high - aim)
                if abs(value - aim) > room * 2 / 3:
                    return False
        return True

    # -- what the crew did ------------------------------------------------------------------
    def _actual(self, plan: Plan, behaviour: str) -> list[tuple[Material, float]]:
        rng = self.rng
        lines = [(self.book.material(a.material), a.kg) for a in plan.additions]
        if behaviour == "cautious":  # add most of it and sample again
            lines = [(m, kg * float(rng.uniform(0.6, 0.8))) for m, kg in lines]
        elif behaviour == "heavy":
            k = int(rng.integers(len(lines)))
            lines[k] = (lines[k][0], lines[k][1] * float(rng.uniform(1.1, 1.25)))
        elif behaviour == "substitute":
            lines = [self._substitute(m, kg) for m, kg in lines]
        elif behaviour == "skip" and len(lines) > 1:
            lines.remove(min(lines, key=lambda line: line[1]))
        merged: dict[str, float] = {}  # a substitute may land on a material already in the plan
        for material, kg in lines:
            merged[material.name] = merged.get(material.name, 0.0) + kg
        return [(self.book.material(name), self._weighable(self.book.material(name), kg))
                for name, kg in merged.items()]

    def _substitute(self, material: Material, kg: float) -> tuple[Material, float]:
        """The material from the bin next to it, in the amount that carries as much of its main element."""
        # A big bag in place of a few kilograms would spoil the heat: the crew would not do that.
        options = [name for name in _SWAPS.get(material.name, ()) if name in self.book.material_names
                   and (self.book.material(name).pack_kg or 0.0) <= kg]
        if not options:
            return material, kg
        other = self.book.material(options[int(self.rng.integers(len(options)))])
        main = _SWAPS_FOR[material.name]
        return other, kg * material.yield_pct(main) / other.yield_pct(main)

    @staticmethod
    def _weighable(material: Material, kg: float) -> float:
        """What the crew can weigh out: whole packs, else to 5 kg, never under the material's minimum."""
        if material.pack_kg:
            return max(1, round(kg / material.pack_kg)) * material.pack_kg
        return max(5.0 * round(kg / 5.0), material.min_kg)

    @staticmethod
    def _as_really(material: Material, factors: dict[str, float]) -> Material:
        factor = factors[material.name]
        recovery = {s: min(1.0, r * factor) for s, r in material.recovery.items()}
        return replace(material, recovery=MappingProxyType(recovery))


def build_demo_logbook(path: Path | str, book: RecipeBook | None = None, days: int = DAYS) -> int:
    """Write the demo week (or its first ``days``) into a new logbook at ``path``; returns the number of heats."""
    book = book if book is not None else load_recipes()
    with Logbook(path, book, durable=False) as logbook, _solver_chatter_hidden():
        logbook.set_shop_name(book.settings.shop_name)
        return _DemoShop(book, logbook, days).run()


@contextmanager
def _solver_chatter_hidden() -> Iterator[None]:
    """HiGHS may print debug lines straight to file descriptor 1, under Python's sys.stdout
    (seen with HiGHS 1.12); the build prints nothing of its own, so descriptor 1 is pointed at the null device."""
    sys.stdout.flush()
    saved = os.dup(1)
    try:
        with open(os.devnull, "wb") as null:
            os.dup2(null.fileno(), 1)
        yield
    finally:
        sys.stdout.flush()
        os.dup2(saved, 1)
        os.close(saved)


def _fingerprint(book: RecipeBook) -> str:
    digest = hashlib.sha256(f"{DEMO_VERSION}/{SCHEMA_VERSION}/{__version__}".encode())
    folder = book.folder
    if folder is not None:
        for path in sorted(Path(folder).rglob("*.toml")):
            digest.update(path.relative_to(folder).as_posix().encode())
            digest.update(path.read_bytes())
    return digest.hexdigest()[:12]


def demo_logbook_path(book: RecipeBook | None = None) -> Path:
    """The demo logbook, built on first use (and again whenever the recipe book changes)."""
    book = book if book is not None else load_recipes()
    path = cache_dir() / f"demo-logbook-{_fingerprint(book)}.sqlite"
    if path.exists():
        return path
    # Build beside it and rename, so a reader (or a second first run) never sees half a week.
    partial = path.with_name(f".{path.stem}.{os.getpid()}.partial.sqlite")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        build_demo_logbook(partial, book)
        os.replace(partial, path)
    except OSError as exc:
        raise InputError(path.parent, "", f"cannot build the demo logbook here ({exc.strerror or exc}); "
                                          "set XDG_CACHE_HOME to a writable folder") from None
    finally:
        for leftover in (partial, Path(f"{partial}-wal"), Path(f"{partial}-shm")):
            if leftover.exists():
                leftover.unlink()
    return path

