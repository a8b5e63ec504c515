"""`meltfix import FILE`: read a spectrometer export, show or print its samples, optionally write a HEAT.toml.

The reading, checking and averaging live in :mod:`meltfix.readers.spectro`; this module only handles the
command line: the rich table, the JSON object (a contract: keep its names) and the heat file.
"""

from __future__ import annotations

import argparse
import json
import shutil
import sys
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import IO, TYPE_CHECKING, Any

from meltfix.base.errors import InputError, visible
from meltfix.base.outputs import markup_safe, write_atomic
from meltfix.plan.numbers import content_text, unit_of
from meltfix.readers.samples import Burn, SpectroSample
from meltfix.readers.spectro import SampleStream, iter_samples
from meltfix.shop.elements import normalise_symbol
from meltfix.shop.heat import Heat, heat_to_toml, validate_heat
from meltfix.shop.recipes import RecipeBook, load_recipes
from meltfix.shop.settings import ShopSettings, load_settings
from meltfix.shop.toml_values import identifier

if TYPE_CHECKING:  # rich is imported where the tables are printed
    from rich.console import Console
    from rich.table import Table


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="the spectrometer export (CSV or TSV)")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of tables")
    parser.add_argument("--recipes", metavar="DIR", help="recipes folder whose shop.toml [spectrometer] "
                        "describes the export layout (default: the built-in recipes)")
    parser.add_argument("--drop-flagged", action="store_true",
                        help="leave a burn that disagrees with the others out of the mean")
    parser.add_argument("--sample", metavar="ID", help="only this sample (and the one written by --heat-out)")
    heat = parser.add_argument_group("writing a heat file")
    heat.add_argument("--heat-out", metavar="HEAT.toml", help="write the last (or --sample) sample as a heat file")
    heat.add_argument("--grade", help="grade of the heat (default: the export's grade column)")
    heat.add_argument("--bath-kg", type=float, metavar="KG", help="bath weight [kg] (needed with --heat-out)")
    heat.add_argument("--capacity-kg", type=float, metavar="KG", help="vessel capacity [kg] (optional)")
    heat.add_argument("--heat", metavar="ID", help="heat id (default: the export's heat column, else the sample id)")
    heat.add_argument("--not-measured", metavar="SYMBOLS", default="",
                      help="elements the grade limits that this sample did not report, comma-separated (e.g. Sn,As): "
                           "written as not_measured, their limits go unchecked")
    heat.add_argument("--force", action="store_true", help="overwrite an existing heat file")


def run(args: argparse.Namespace) -> int:
    stream = iter_samples(args.file, _settings(args.recipes), drop_flagged=args.drop_flagged)
    # The samples are read one at a time (an export may hold a year of heats); --heat-out needs only
    # the last one, or the one --sample names.
    chosen: SpectroSample | None = None
    others: list[str] = []
    others_count = 0

    def selected() -> Iterator[SpectroSample]:
        nonlocal chosen, others_count
        for sample in stream:
            if args.sample is None or sample.sample_id == args.sample:
                chosen = sample
                yield sample
            else:
                others_count += 1
                if len(others) < _LISTED_IDS:
                    others.append(sample.sample_id)

    def check_chosen() -> SpectroSample:
        if chosen is None:
            known = ", ".join(others) + (f" and {others_count - len(others)} more" if others_count > len(others) else "")
            raise InputError("command line", "--sample", f"no sample '{args.sample}' in {args.file} (it holds: {known})")
        return chosen

    if args.json:
        # Written as each sample is read, but to a spool first: a problem further down the file
        # must still leave stdout empty (nothing is half-imported).
        with tempfile.SpooledTemporaryFile(max_size=_SPOOL_BYTES, mode="w+", encoding="utf-8") as spool:
            _write_json(spool, stream, selected())
            sample = check_chosen()
            written = _write_heat(args, stream.source, sample) if args.heat_out else None
            spool.seek(0)
            shutil.copyfileobj(spool, sys.stdout)
        print()
        if written:
            print(visible(f"meltfix: wrote {written} from sample {sample.sample_id}"), file=sys.stderr)
    else:
        _check_heat_arguments(args)
        _print_tables(stream, selected())
        sample = check_chosen()
        if args.heat_out:
            _print_written(_write_heat(args, stream.source, sample), sample)
    return 0


# Sample ids listed when --sample names none of the export's (a big export holds thousands).
_LISTED_IDS = 20
# JSON held in memory up to this size, then on disk.
_SPOOL_BYTES = 4 << 20


def _settings(folder: str | None) -> ShopSettings:
    if folder is None:
        from meltfix.base.paths import default_recipes_dir

        try:
            path = default_recipes_dir()
        except FileNotFoundError:
            return ShopSettings()
    else:
        path = Path(folder)
        if not path.is_dir():
            raise InputError(path, "", "recipes folder not found")
    return load_settings(path)


# ---------------------------------------------------------------------------------------------
# JSON (a contract: keep its names; fields may be added)


def _sample_json(sample: SpectroSample) -> dict[str, Any]:
    return {
        "sample": sample.sample_id,
        "burns": len(sample.accepted_burns),
        "analysis": {symbol: round(pct, 6) for symbol, pct in sample.analysis.pct.items()},
        "flags": list(sample.flags),
        "below_limit": [s for s in sample.analysis.pct if s in sample.analysis.below_limit],
        "left_out_burns": [b.label for b in sample.burns if not b.accepted],
        "grade": sample.grade,
    }


def _write_json(out: IO[str], stream: SampleStream, samples: Iterator[SpectroSample]) -> None:
    """One JSON object, ``{"samples": [...], "source": ..., "ignored_columns": ..., "notes": ...}``,
    written a sample at a time (the notes are complete only once every sample is read)."""
    out.write('{"samples": [')
    for number, sample in enumerate(samples):
        out.write((", " if number else "") + json.dumps(_sample_json(sample)))
    out.write(f'], "source": {json.dumps(stream.source)}, "ignored_columns": {json.dumps(list(stream.ignored_columns))}, '
              f'"notes": {json.dumps(list(stream.notes))}}}')


# ---------------------------------------------------------------------------------------------
# HEAT.toml


def heat_file_text(sample: SpectroSample, heat: Heat, source: str) -> str:
    """A HEAT.toml for one sample, headed by where it came from and the sample's flags."""
    lines = [f"Written by meltfix import from {source}, sample {sample.sample_id} "
             f"({len(sample.accepted_burns)} burns averaged)."]
    lines += [f"Flag: {flag}" for flag in sample.flags]
    # A comment must stay on one line whatever the export's cells held.
    return "".join(f"# {visible(' '.join(line.split()))}\n" for line in lines) + heat_to_toml(heat)


def _check_bath(args: argparse.Namespace) -> None:
    if args.bath_kg is None:
        raise InputError("command line", "--bath-kg", "is needed to write a heat file (the bath weight in kg)")
    if not args.bath_kg > 0:
        raise InputError("command line", "--bath-kg", f"must be above 0, got {args.bath_kg:g}")


def _recipes_with(args: argparse.Namespace, grade: str) -> RecipeBook:
    book = load_recipes(args.recipes)
    if grade not in book.grades:
        raise InputError("command line", "--grade", f"'{grade}' is not a grade of the recipes "
                         f"(known: {', '.join(book.grades)})")
    return book


def _check_heat_arguments(args: argparse.Namespace) -> None:
    """The --heat-out checks that need no sample, made before the tables of a long export are printed."""
    if args.heat_out:
        _check_bath(args)
        if args.grade:
            _recipes_with(args, args.grade)


def _write_heat(args: argparse.Namespace, source: str, sample: SpectroSample) -> Path:
    path = Path(args.heat_out)
    grade = args.grade or sample.grade
    if not grade:
        raise InputError("command line", "--grade", f"the export names no grade for sample {sample.sample_id}; "
                         "give one with --grade")
    _check_bath(args)
    book = _recipes_with(args, grade)
    # The id becomes the heat file's `heat`: a sample id holding a control character or a
    # 10,000-character cell would write a file the planner then refuses, so it is refused here.
    try:
        heat_id = identifier(args.heat or sample.heat or sample.sample_id, "command line", "--heat")
    except InputError as exc:
        if args.heat:
            raise
        raise InputError("command line", "--heat", f"the export's id {visible(sample.heat or sample.sample_id)[:40]!r} "
                         f"{exc.message}; give the heat id with --heat") from None
    not_measured = frozenset(normalise_symbol(s, "command line", "--not-measured")
                             for s in args.not_measured.split(",") if s.strip())
    try:
        heat = validate_heat(Heat(heat_id=heat_id, grade=grade, bath_kg=args.bath_kg, analysis=sample.analysis,
                                  capacity_kg=args.capacity_kg, not_measured=not_measured,
                                  stage=book.settings.heat_stage), book, "command line")
    except InputError as exc:
        if exc.field != "analysis":
            raise
        raise InputError("command line", "--not-measured", f"sample {sample.sample_id}: {exc.message.split(';')[0]}; "
                         "give --not-measured with those symbols to write the heat with those limits unchecked") from None
    body = heat_file_text(sample, heat, Path(source).name)
    if path.exists() and not args.force:
        raise InputError(path, "", "already exists; add --force to overwrite it")
    write_atomic(path, body, what="the heat file")
    return path


# ---------------------------------------------------------------------------------------------
# Tables


def _reading_text(burn: Burn, symbol: str) -> tuple[str, bool]:
    """One burn's reading as a cell (marked when it disagrees), and whether it is marked."""
    reading = burn.readings.get(symbol)
    if reading is None:
        return "", False
    shown = ("<" if reading.below_limit else "") + content_text(symbol, reading.pct)
    if symbol in burn.outlier_in:
        return f"[bold red]{shown} ![/]", True
    if symbol in burn.disputed_in:
        return f"[yellow]{shown} ?[/]", True
    return shown, False


def _sample_table(sample: SpectroSample, title: str, console: Console) -> tuple[Table, bool]:
    """The burns of a sample, one per row; where that is wider than the console, one element per
    row instead (a burn per column), so no value is ever cut. Also says whether a cell is marked."""
    from rich.measure import Measurement
    from rich.table import Table

    symbols = list(sample.analysis.pct)
    mean = {s: ("<" if s in sample.analysis.below_limit else "") + content_text(s, pct)
            for s, pct in sample.analysis.pct.items()}
    cells = {burn.label: {s: _reading_text(burn, s) for s in symbols} for burn in sample.burns}
    marked = any(flag for row in cells.values() for _, flag in row.values())
    labels = {burn.label: markup_safe(burn.label) + ("" if burn.accepted else " (left out)") for burn in sample.burns}
    wide = Table(title=title, title_justify="left")
    wide.add_column("Burn")
    wide.add_column("Row", justify="right", style="dim")
    for symbol in symbols:
        wide.add_column(f"{symbol} ppm" if unit_of(symbol) == "ppm" else symbol, justify="right", no_wrap=True)
    for burn in sample.burns:
        wide.add_row(labels[burn.label], str(burn.row), *(cells[burn.label][s][0] for s in symbols),
                     style=None if burn.accepted else "dim")
    wide.add_section()
    wide.add_row(f"mean of {len(sample.accepted_burns)}", "", *mean.values(), style="bold")
    if Measurement.get(console, console.options.update_width(10_000), wide).maximum <= console.width:
        return wide, marked
    long = Table(title=title, title_justify="left")
    long.add_column("El")
    for burn in sample.burns:
        long.add_column(f"burn {labels[burn.label]}\nrow {burn.row}", justify="right", no_wrap=True,
                        style=None if burn.accepted else "dim")
    long.add_column(f"mean of {len(sample.accepted_burns)}", justify="right", no_wrap=True, style="bold")
    for symbol in symbols:
        long.add_row(f"{symbol} ppm" if unit_of(symbol) == "ppm" else symbol,
                     *(cells[burn.label][symbol][0] for burn in sample.burns), mean[symbol])
    return long, marked


def _print_tables(stream: SampleStream, samples: Iterator[SpectroSample]) -> None:
    """Each sample's table as soon as it is read; the legend, if any cell is marked, at the end."""
    from rich.console import Console

    console = Console()
    marked = False
    for sample in samples:
        title = f"Sample {markup_safe(sample.sample_id)}" + (f" · grade {markup_safe(sample.grade)}" if sample.grade else "")
        grid, marked_here = _sample_table(sample, title, console)
        marked = marked or marked_here
        console.print(grid)
        for flag in sample.flags:
            console.print(f"  [yellow]•[/] {markup_safe(flag)}")
        console.print()
    if marked:
        console.print("[bold red]![/] this burn disagrees with the others   "
                      "[yellow]?[/] burns disagree, cannot tell which   < below the detection limit (an upper bound)")
    for note in stream.notes:
        console.print(f"[dim]{markup_safe(note)}[/]")
    if stream.ignored_columns:
        console.print(f"[dim]Columns not read: {markup_safe(', '.join(stream.ignored_columns))}[/]")


def _print_written(written: Path, sample: SpectroSample) -> None:
    from rich.console import Console

    Console().print(f"Wrote {markup_safe(written)} from sample {markup_safe(sample.sample_id)}.")
