"""Where the built-in shop data is, both in a source checkout and after a normal install."""

from __future__ import annotations

import os
from pathlib import Path

_PACKAGE = Path(__file__).resolve().parent.parent  # meltfix/, two up from meltfix/base/paths.py


def _data_dir(name: str) -> Path:
    # A wheel carries the data inside the package (see pyproject's force-include); an editable
    # install or a source checkout reads it from the repository root.
    for candidate in (_PACKAGE / "_data" / name, _PACKAGE.parent / name):
        if candidate.is_dir():
            return candidate
    raise FileNotFoundError(f"meltfix's built-in {name}/ folder is missing from this installation")


def default_recipes_dir() -> Path:
    """The demo shop's recipe book (materials and grades)."""
    return _data_dir("recipes")


def demo_dir() -> Path:
    """The demo shop's heats, spectrometer exports and recorded heats."""
    return _data_dir("demo")


def cache_dir() -> Path:
    """$XDG_CACHE_HOME/meltfix (when set to an absolute path), else ~/.cache/meltfix."""
    xdg = os.environ.get("XDG_CACHE_HOME", "").strip()
    base = Path(xdg) if xdg and Path(xdg).is_absolute() else Path.home() / ".cache"
    return base / "meltfix"


def user_data_dir() -> Path:
    """meltfix's folder in the user's data folder: $XDG_DATA_HOME (when set to an absolute path), else
    ~/.local/share; on Windows %LOCALAPPDATA%."""
    if os.name == "nt" and os.environ.get("LOCALAPPDATA"):
        return Path(os.environ["LOCALAPPDATA"]) / "meltfix"
    xdg = os.environ.get("XDG_DATA_HOME", "").strip()
    base = Path(xdg) if xdg and Path(xdg).is_absolute() else Path.home() / ".local" / "share"
    return base / "meltfix"
