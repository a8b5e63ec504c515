"""The shop's recipe book: addition materials, grades and shop settings, read from TOML and validated strictly.

File layout (a contract: keep its names): ``materials.toml`` at the root of a recipes folder (more ``*.toml`` files
under ``materials/`` add to it), one grade per file under ``grades/``, and an optional ``shop.toml``
with shop-wide settings. Every problem raises :class:`InputError` naming the file and the field.
Each file's entries are read by :mod:`~meltfix.shop.materials`, :mod:`~meltfix.shop.grades` and
:mod:`~meltfix.shop.settings`; this module puts them together.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from types import MappingProxyType

from meltfix.base.errors import InputError
from meltfix.shop.grades import Grade, load_grades
from meltfix.shop.materials import Material, load_materials
from meltfix.shop.settings import ShopSettings, load_settings


@dataclass(frozen=True)
class RecipeBook:
    """Everything the planner knows about the shop."""

    materials: tuple[Material, ...]
    grades: Mapping[str, Grade]
    settings: ShopSettings = ShopSettings()
    folder: Path | None = None

    def material(self, name: str) -> Material:
        for material in self.materials:
            if material.name == name:
                return material
        raise KeyError(name)

    def grade(self, name: str) -> Grade:
        return self.grades[name]

    @property
    def material_names(self) -> tuple[str, ...]:
        return tuple(m.name for m in self.materials)


def load_recipes(folder: Path | str | None = None) -> RecipeBook:
    """Load and validate a recipes folder (the built-in demo shop when ``folder`` is None)."""
    if folder is None:
        from meltfix.base.paths import default_recipes_dir

        folder = default_recipes_dir()
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError(folder, "", "recipes folder not found")
    settings = load_settings(folder)  # first: the materials name the shop's stages
    materials = load_materials(folder, tuple(settings.stages))
    grades = {name: replace(grade, aluminium_recovery_basis=settings.aluminium_recovery_basis)
              for name, grade in load_grades(folder, {m.name for m in materials}).items()}
    return RecipeBook(materials=materials, grades=MappingProxyType(grades), settings=settings, folder=folder)
