"""Malformed recipe folders: each gives one InputError naming the file and the field at fault.

Every case starts from a tiny valid recipes folder written into tmp_path and breaks one thing.
"""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

import pytest

from meltfix.base.errors import InputError
from meltfix.base.paths import default_recipes_dir
from meltfix.shop.recipes import load_recipes

MATERIALS = """\
[[material]]
name = "FeMn"
kind = "alloy"
price_per_kg = 1.4
composition = { Mn = 78.0, C = 7.0 }
recovery = { Mn = 0.9 }
recovery_by_stage = { ladle = { C = 0.7 } }
stock_kg = 500

[[material]]
name = "Scrap"
kind = "dilution"
price_per_kg = 0.4
composition = { Cu = 0.03 }
"""

GRADE = """\
name = "G1"
family = "steel"
forbid = ["Scrap"]

[window]
C = [0.18, 0.23]
Mn = [0.30, 0.60]

[aim]
C = 0.20
"""

SHOP = """\
shop_name = "Test shop"
max_temp_drop_c = 25.0
"""

Files = dict[str, str | None]


def base_files() -> Files:
    return {"materials.toml": MATERIALS, "grades/g1.toml": GRADE, "shop.toml": SHOP}


def edit(name: str, old: str, new: str) -> Callable[[Files], None]:
    """Replace ``old`` by ``new`` in one file (and fail loudly if ``old`` is not there)."""

    def apply(files: Files) -> None:
        content = files[name]
        assert content is not None and old in content, f"{old!r} not in {name}"
        files[name] = content.replace(old, new, 1)

    return apply


def put(name: str, content: str | None) -> Callable[[Files], None]:
    """Write a whole file, or remove it with ``None``."""

    def apply(files: Files) -> None:
        files[name] = content

    return apply


def write(folder: Path, files: Files) -> None:
    for name, content in files.items():
        if content is not None:
            path = folder / name
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text(content, encoding="utf-8")


MATERIAL_KEYS = ("addition_class, chill_per_kg_t, composition, default_recovery, kg_per_m, kind, min_kg, name, "
                 "notes, pack_kg, price_per_kg, recovery, recovery_by_stage, recovery_scatter, stages, standard, "
                 "stock_kg")

# (case, change, file at fault relative to the folder, field, message)
CASES: list[tuple[str, Callable[[Files], None], str, str, str]] = [
    ("missing name", edit("materials.toml", 'name = "Scrap"\n', ""),
     "materials.toml", "material #2.name", "is missing"),
    ("blank name", edit("materials.toml", 'name = "Scrap"', 'name = "  "'),
     "materials.toml", "material #2.name", "expected a non-empty text, got '  '"),
    ("missing price", edit("materials.toml", "price_per_kg = 1.4\n", ""),
     "materials.toml", "material 'FeMn'.price_per_kg", "is missing"),
    ("price as text", edit("materials.toml", "price_per_kg = 1.4", 'price_per_kg = "1,40"'),
     "materials.toml", "material 'FeMn'.price_per_kg", "expected a number, got '1,40'"),
    ("negative price", edit("materials.toml", "price_per_kg = 1.4", "price_per_kg = -1.4"),
     "materials.toml", "material 'FeMn'.price_per_kg", "must not be negative, got -1.4"),
    ("negative stock", edit("materials.toml", "stock_kg = 500", "stock_kg = -500"),
     "materials.toml", "material 'FeMn'.stock_kg", "must not be negative, got -500"),
    ("zero pack", edit("materials.toml", "stock_kg = 500", "stock_kg = 500\npack_kg = 0"),
     "materials.toml", "material 'FeMn'.pack_kg", "must be above 0, got 0"),
    ("unknown element", edit("materials.toml", "C = 7.0", "Cb = 7.0"),
     "materials.toml", "material 'FeMn'.composition.Cb", "'Cb' is not a chemical element symbol"),
    ("element above 100", edit("materials.toml", "Mn = 78.0", "Mn = 120.0"),
     "materials.toml", "material 'FeMn'.composition.Mn", "120.0 wt % is above 100"),
    ("composition sums over 100", edit("materials.toml", "C = 7.0", "C = 30.0"),
     "materials.toml", "material 'FeMn'.composition", "the elements add up to 108 %, over 100 %"),
    ("iron does not balance", edit("materials.toml", "C = 7.0 }", "C = 7.0, Fe = 10.0 }"),
     "materials.toml", "material 'FeMn'.composition.Fe", "iron 10 % and the rest 85 % do not add up to 100 %"),
    ("recovery 0", edit("materials.toml", "recovery = { Mn = 0.9 }", "recovery = { Mn = 0 }"),
     "materials.toml", "material 'FeMn'.recovery.Mn", "recovery must be above 0 and at most 1, got 0"),
    ("recovery 1.2", edit("materials.toml", "recovery = { Mn = 0.9 }", "recovery = { Mn = 1.2 }"),
     "materials.toml", "material 'FeMn'.recovery.Mn", "recovery must be above 0 and at most 1, got 1.2"),
    ("recovery of an absent element", edit("materials.toml", "recovery = { Mn = 0.9 }", "recovery = { Si = 0.8 }"),
     "materials.toml", "material 'FeMn'.recovery.Si", "Si is not in the composition"),
    ("unknown kind", edit("materials.toml", 'kind = "dilution"', 'kind = "scrap"'),
     "materials.toml", "material 'Scrap'.kind", "'scrap' is not one of alloy, carbon, metal, dilution, deoxidiser, other"),
    ("typo in a key", edit("materials.toml", "stock_kg = 500", "stok_kg = 500"),
     "materials.toml", "material 'FeMn'.stok_kg", f"unknown key (expected one of: {MATERIAL_KEYS})"),
    ("duplicate material names", edit("materials.toml", 'name = "Scrap"', 'name = "FeMn"'),
     "materials.toml", "material 'FeMn'", "duplicate name (also in materials.toml)"),
    ("single [material] table", put("materials.toml", MATERIALS.split("\n\n")[0].replace("[[material]]", "[material]")),
     "materials.toml", "material", "expected [[material]] entries"),
    ("no materials", put("materials.toml", "# nothing yet\n"),
     "materials.toml", "material", "no [[material]] entries"),
    ("pack larger than the stock", edit("materials.toml", "stock_kg = 500", "stock_kg = 500\npack_kg = 1000"),
     "materials.toml", "material 'FeMn'.pack_kg", "1000 kg is more than the 500 kg in stock"),
    ("notes not a text", edit("materials.toml", "stock_kg = 500", "stock_kg = 500\nnotes = 5"),
     "materials.toml", "material 'FeMn'.notes", "expected a text, got 5"),
    ("window min above max", edit("grades/g1.toml", "C = [0.18, 0.23]", "C = [0.23, 0.18]"),
     "grades/g1.toml", "window.C", "min 0.23 is above max 0.18"),
    ("window not a pair", edit("grades/g1.toml", "C = [0.18, 0.23]", "C = [0.18]"),
     "grades/g1.toml", "window.C", "expected [min, max] in wt %, got [0.18]"),
    ("window max above 100", edit("grades/g1.toml", "Mn = [0.30, 0.60]", "Mn = [0.30, 160]"),
     "grades/g1.toml", "window.Mn", "max 160 is above 100 %"),
    ("unknown element in window", edit("grades/g1.toml", "Mn = [0.30, 0.60]", "Mx = [0.30, 0.60]"),
     "grades/g1.toml", "window.Mx", "'Mx' is not a chemical element symbol"),
    ("aim outside window", edit("grades/g1.toml", "C = 0.20", "C = 0.30"),
     "grades/g1.toml", "aim.C", "aim 0.3 is outside the window 0.18–0.23"),
    ("aim without window", edit("grades/g1.toml", "C = 0.20", "C = 0.20\nSi = 0.25"),
     "grades/g1.toml", "aim.Si", "Si has an aim but no window"),
    ("grade without name", edit("grades/g1.toml", 'name = "G1"\n', ""),
     "grades/g1.toml", "name", "is missing"),
    ("typo in a grade key", edit("grades/g1.toml", "[aim]", "[aims]"),
     "grades/g1.toml", "aims", "unknown key (expected one of: aim, family, forbid, index, name, standard, window)"),
    ("unknown family", edit("grades/g1.toml", 'family = "steel"', 'family = "iron"'),
     "grades/g1.toml", "family", "'iron' is not 'steel' or 'cast iron'"),
    ("forbid names an unknown material", edit("grades/g1.toml", 'forbid = ["Scrap"]', 'forbid = ["Unobtainium"]'),
     "grades/g1.toml", "forbid", "no material named 'Unobtainium' in the recipe book"),
    ("forbid not a list", edit("grades/g1.toml", 'forbid = ["Scrap"]', 'forbid = "Scrap"'),
     "grades/g1.toml", "forbid", "expected a list of material names"),
    ("index min above max", edit("grades/g1.toml", "[aim]", "[index.CEV]\nterms = { C = 1.0 }\nmin = 0.5\nmax = 0.4\n\n[aim]"),
     "grades/g1.toml", "index.CEV", "min 0.5 is above max 0.4"),
    ("index without terms", edit("grades/g1.toml", "[aim]", "[index.CEV]\nmax = 0.45\n\n[aim]"),
     "grades/g1.toml", "index.CEV.terms", "is missing"),
    ("two grade files with one name", put("grades/g2.toml", GRADE),
     "grades/g2.toml", "name", "grade 'G1' is already defined in g1.toml"),
    ("typo in shop.toml", edit("shop.toml", "max_temp_drop_c", "max_temp_drop"),
     "shop.toml", "max_temp_drop",
     "unknown key (expected one of: addition_order, aim_penalty, aluminium_recovery_basis, bath_kg_range, "
     "correction_cost, currency, default_stage, large_addition_kg_per_t, max_portion_kg, max_temp_drop_c, max_unlisted_rise_pct, "
     "mg_fade_pct_per_min, plan_time_limit_s, plausible_max_pct, scatter, shop_name, spectrometer, stage, stir_min, "
     "superheat_c, target_odds, ticket_dir, ticket_print_command, treatment_to_pour_min, units)"),
    ("aluminium recovery basis misspelt", edit("shop.toml", "max_temp_drop_c = 25.0",
                                               'max_temp_drop_c = 25.0\naluminium_recovery_basis = "tapped"'),
     "shop.toml", "aluminium_recovery_basis", "'tapped' is not one of killed, tap"),
    ("negative temperature drop", edit("shop.toml", "max_temp_drop_c = 25.0", "max_temp_drop_c = -25.0"),
     "shop.toml", "max_temp_drop_c", "must not be negative, got -25.0"),
    ("grades folder missing", put("grades/g1.toml", None),
     ".", "grades/", "folder is missing"),
    # Stages, addition classes and wire
    ("material at an unknown stage", edit("materials.toml", "stock_kg = 500", 'stock_kg = 500\nstages = ["tundish"]'),
     "materials.toml", "material 'FeMn'.stages", "'tundish' is not a stage of this shop (shop.toml lists: furnace, ladle)"),
    ("stage the shop does not list", edit("shop.toml", "max_temp_drop_c = 25.0",
                                          'max_temp_drop_c = 25.0\n[stage.furnace]\n[stage.lf]\ncan_reheat = true'),
     "materials.toml", "material 'FeMn'.recovery_by_stage.ladle", "'ladle' is not a stage of this shop (shop.toml lists: furnace, lf)"),
    ("default stage the shop does not list", edit("shop.toml", "max_temp_drop_c = 25.0",
                                                  'max_temp_drop_c = 25.0\ndefault_stage = "tundish"'),
     "shop.toml", "default_stage", "'tundish' is not a stage of this shop (shop.toml lists: furnace, ladle)"),
    ("empty stage list", edit("materials.toml", "stock_kg = 500", "stock_kg = 500\nstages = []"),
     "materials.toml", "material 'FeMn'.stages", "expected a non-empty list of stage names, got []"),
    ("stage recovery of an absent element", edit("materials.toml", "recovery_by_stage = { ladle = { C = 0.7 } }",
                                                 "recovery_by_stage = { ladle = { Si = 0.7 } }"),
     "materials.toml", "material 'FeMn'.recovery_by_stage.ladle.Si", "Si is not in the composition"),
    ("stage recovery 1.5", edit("materials.toml", "{ C = 0.7 }", "{ C = 1.5 }"),
     "materials.toml", "material 'FeMn'.recovery_by_stage.ladle.C", "recovery must be above 0 and at most 1, got 1.5"),
    ("negative kg_per_m", edit("materials.toml", "stock_kg = 500", "stock_kg = 500\nkg_per_m = -0.2"),
     "materials.toml", "material 'FeMn'.kg_per_m", "must be above 0, got -0.2"),
    ("unknown addition class", edit("materials.toml", "stock_kg = 500", 'stock_kg = 500\naddition_class = "early"'),
     "materials.toml", "material 'FeMn'.addition_class",
     "'early' is not one of scrap, treatment, deoxidiser, bulk alloy, carbon, trim, late, wire"),
    ("typo in a stage", edit("shop.toml", "max_temp_drop_c = 25.0", "max_temp_drop_c = 25.0\n[stage.lf]\ncan_reheet = true"),
     "shop.toml", "stage.lf.can_reheet",
     "unknown key (expected one of: can_reheat, max_temp_drop_c, reheat_c_per_min, reheat_cost_per_c, reheat_max_c)"),
    ("reheat cost at a stage without heating", edit("shop.toml", "max_temp_drop_c = 25.0",
                                                    "max_temp_drop_c = 25.0\n[stage.ladle]\nreheat_cost_per_c = 0.1"),
     "shop.toml", "stage.ladle.reheat_cost_per_c", "is set but the stage cannot reheat (can_reheat = false)"),
    ("unknown class in the order", edit("shop.toml", "max_temp_drop_c = 25.0", 'addition_order = ["alloy"]'),
     "shop.toml", "addition_order",
     "'alloy' is not one of scrap, treatment, deoxidiser, bulk alloy, carbon, trim, late, wire"),
    ("zero lot size", edit("shop.toml", "max_temp_drop_c = 25.0", "max_portion_kg = 0"),
     "shop.toml", "max_portion_kg", "must be above 0, got 0"),
    ("can_reheat not a boolean", edit("shop.toml", "max_temp_drop_c = 25.0", '[stage.lf]\ncan_reheat = "yes"'),
     "shop.toml", "stage.lf.can_reheat", "expected true or false, got 'yes'"),
]


@pytest.mark.parametrize(("change", "at_fault", "field", "message"), [case[1:] for case in CASES],
                         ids=[case[0] for case in CASES])
def test_malformed_recipes_name_file_and_field(tmp_path: Path, change: Callable[[Files], None], at_fault: str,
                                               field: str, message: str) -> None:
    files = base_files()
    change(files)
    write(tmp_path, files)
    with pytest.raises(InputError) as caught:
        load_recipes(tmp_path)
    source = tmp_path if at_fault == "." else tmp_path / at_fault
    assert (caught.value.source, caught.value.field, caught.value.message) == (str(source), field, message)
    assert str(caught.value) == f"{source}: {field}: {message}"


def test_the_base_folder_is_valid(tmp_path: Path) -> None:
    write(tmp_path, base_files())
    book = load_recipes(tmp_path)
    assert book.material_names == ("FeMn", "Scrap")
    assert book.grade("G1").forbidden == {"Scrap"}


@pytest.mark.parametrize("name", ["materials.toml", "grades/g1.toml", "shop.toml"])
def test_bad_toml_names_the_file_and_line(tmp_path: Path, name: str) -> None:
    files = base_files()
    files[name] = files[name].replace('"', "", 1)  # an unterminated string on the first quoted line
    write(tmp_path, files)
    with pytest.raises(InputError) as caught:
        load_recipes(tmp_path)
    error = caught.value
    assert (error.source, error.field) == (str(tmp_path / name), "")
    assert error.message.startswith("not valid TOML (") and "line " in error.message


def test_missing_materials_file(tmp_path: Path) -> None:
    files = base_files()
    files["materials.toml"] = None
    write(tmp_path, files)
    with pytest.raises(InputError) as caught:
        load_recipes(tmp_path)
    assert str(caught.value) == f"{tmp_path / 'materials.toml'}: file not found"


def test_empty_grades_folder(tmp_path: Path) -> None:
    files = base_files()
    files["grades/g1.toml"] = None
    write(tmp_path, files)
    (tmp_path / "grades").mkdir()
    with pytest.raises(InputError) as caught:
        load_recipes(tmp_path)
    assert str(caught.value) == f"{tmp_path / 'grades'}: holds no grade file (*.toml)"


def test_missing_recipes_folder(tmp_path: Path) -> None:
    with pytest.raises(InputError) as caught:
        load_recipes(tmp_path / "nowhere")
    assert str(caught.value) == f"{tmp_path / 'nowhere'}: recipes folder not found"


def test_extra_materials_file_duplicate_names_the_other_file(tmp_path: Path) -> None:
    # More materials may come from materials/*.toml; a clash names both files.
    files = base_files()
    files["materials/extra.toml"] = MATERIALS.split("\n\n")[1]
    write(tmp_path, files)
    with pytest.raises(InputError) as caught:
        load_recipes(tmp_path)
    assert str(caught.value) == (f"{tmp_path / 'materials' / 'extra.toml'}: material 'Scrap': "
                                 "duplicate name (also in materials.toml)")


@pytest.mark.parametrize(("file", "old", "new", "field", "message"), [
    ("materials.toml", "recovery = { Cr = 0.95, C = 0.90, Si = 0.80, Al = 0.30 }",
     "recovery = { Cr = 1.2, C = 0.90, Si = 0.80, Al = 0.30 }", "material 'LC FeCr'.recovery.Cr",
     "recovery must be above 0 and at most 1, got 1.2"),
    ("grades/52100.toml", '"FeV 80"]', '"FeV 8O"]', "forbid", "no material named 'FeV 8O' in the recipe book"),
])
def test_one_wrong_value_in_the_built_in_book_is_named(tmp_path: Path, file: str, old: str, new: str, field: str,
                                                       message: str) -> None:
    # The shop's real book with one slip of the pen: the loader names the file and the field.
    folder = tmp_path / "recipes"
    shutil.copytree(default_recipes_dir(), folder)
    path = folder / file
    content = path.read_text(encoding="utf-8")
    assert content.count(old) == 1
    path.write_text(content.replace(old, new), encoding="utf-8")
    with pytest.raises(InputError) as caught:
        load_recipes(folder)
    assert (caught.value.source, caught.value.field, caught.value.message) == (str(path), field, message)
