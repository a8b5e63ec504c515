"""Chemical elements: symbols, units (wt % and ppm) and the atomic weights the planner uses."""

from __future__ import annotations

import math
import re

from meltfix.base.errors import InputError

# Every symbol of the periodic table (IUPAC), so a typing slip such as "Mo" vs "MO" or "Cb" is caught.
SYMBOLS: frozenset[str] = frozenset(
    """H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge As Se
    Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho
    Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm
    Md No Lr Rf Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og""".split()
)

# Gases and boron are reported in ppm by melt shops; everything else in wt %.
PPM_ELEMENTS: frozenset[str] = frozenset({"N", "O", "B", "H"})

PPM_PER_PCT = 10_000.0

# Standard atomic weights [g/mol], CIAAW 2021 (conventional values where an interval is given).
ATOMIC_WEIGHT: dict[str, float] = {
    "H": 1.008, "B": 10.81, "C": 12.011, "N": 14.007, "O": 15.999, "Mg": 24.305,
    "Al": 26.9815384, "Si": 28.085, "P": 30.973761998, "S": 32.06, "Ca": 40.078,
    "Ti": 47.867, "V": 50.9415, "Cr": 51.9961, "Mn": 54.938043, "Fe": 55.845,
    "Ni": 58.6934, "Cu": 63.546, "Zr": 91.224, "Nb": 92.90637, "Mo": 95.95,
    "Sn": 118.71, "W": 183.84, "Co": 58.933194,
}

# Display order: the usual order of a steel analysis sheet, then anything else alphabetically.
_SHEET_ORDER = "C Si Mn P S Cr Ni Mo Cu Al V Nb Ti B N O H Sn Co W Ca Mg Zr".split()
_SHEET_RANK = {symbol: rank for rank, symbol in enumerate(_SHEET_ORDER)}


def element_sort_key(symbol: str) -> tuple[int, str]:
    """Sort key that lists elements as an analysis sheet does (C, Si, Mn, P, S, ...)."""
    return (_SHEET_RANK.get(symbol, len(_SHEET_ORDER)), symbol)


def normalise_symbol(text: str, source: object, field: str) -> str:
    """Return the element symbol in its proper case, or raise naming the source and field.

    ``"mn"`` and ``"MN"`` become ``"Mn"``; an unknown symbol is an error, never dropped.
    """
    cleaned = text.strip()
    candidate = cleaned[:1].upper() + cleaned[1:].lower()
    if candidate not in SYMBOLS:
        raise InputError(source, field, f"'{text}' is not a chemical element symbol")
    return candidate


_NUMBER = re.compile(r"^[+-]?(\d+([.,]\d*)?|[.,]\d+)([eE][+-]?\d+)?$")


def parse_number(text: str, source: object, field: str) -> float:
    """Parse a number written with a decimal point or a decimal comma ("0,15")."""
    cleaned = text.strip().replace("\u2212", "-")
    if not _NUMBER.match(cleaned):
        raise InputError(source, field, f"'{text}' is not a number")
    value = float(cleaned.replace(",", "."))
    if not math.isfinite(value):
        raise InputError(source, field, f"'{text}' is not a finite number")
    return value
