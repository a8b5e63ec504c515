"""The lines of an export: from a file (its encoding, refusals and decoding errors) or from text, and the
first lines kept while the layout is detected."""

from __future__ import annotations

import codecs
import csv
import io
import re
from collections.abc import Iterable, Iterator
from pathlib import Path

from meltfix.base.errors import InputError, file_refusals


class TextLines:
    """An export already in memory."""

    def __init__(self, body: str) -> None:
        self.body = body

    def open(self) -> Iterator[str]:
        return iter(io.StringIO(self.body, newline=""))


class FileLines:
    """An export on disk, decoded line by line; opened afresh for each pass over it."""

    def __init__(self, path: Path, encoding: str) -> None:
        self.path = path
        with file_refusals(path), path.open("rb") as file:
            start = file.read(4)
        if start.startswith(b"PK\x03\x04"):
            raise InputError(path, "", "is a spreadsheet workbook (.xlsx), not CSV text; save or export it as CSV")
        self.encoding = encoding
        if start.startswith((b"\xff\xfe", b"\xfe\xff")):
            # "Unicode text" exports announce UTF-16 with a byte-order mark: no guessing involved.
            self.encoding = "utf-16"
        elif codecs.lookup(encoding).name == "utf-8":
            self.encoding = "utf-8-sig"  # a byte-order mark is common and harmless

    def open(self) -> Iterator[str]:
        try:
            with self.path.open("r", encoding=self.encoding, newline="") as text:
                for number, line in enumerate(text, 1):
                    if "\x00" in line and self.encoding != "utf-16":
                        raise InputError(self.path, f"line {number}", "holds a NUL byte: this is not a text export")
                    yield line
        except UnicodeDecodeError:
            raise self._decoding_error() from None
        except OSError as exc:
            raise InputError(self.path, "", f"cannot be read ({exc.strerror})") from None

    def _decoding_error(self) -> InputError:
        # The text layer decodes in blocks, so the line of the first bad byte is found again here.
        # No silent fallback to cp1252: it decodes almost any bytes, so a wrong guess would turn
        # into wrong header names instead of an error. The shop states its encoding once.
        decoder = codecs.getincrementaldecoder(self.encoding)()
        name = "UTF-8" if self.encoding == "utf-8-sig" else self.encoding
        hint = ("; if the spectrometer writes Windows-1252 (ANSI), set encoding = \"cp1252\" in shop.toml "
                "[spectrometer]")
        with self.path.open("rb") as file:
            for number, raw in enumerate(file, 1):
                try:
                    decoder.decode(raw)
                except UnicodeDecodeError as exc:
                    return InputError(self.path, f"line {number}",
                                      f"byte 0x{exc.object[exc.start]:02X} is not {name} text{hint}")
        return InputError(self.path, "", f"is not {name} text{hint}")


class Head:
    """The first lines of an export, kept while its layout is detected so its rows can be read again."""

    def __init__(self, lines: Iterator[str]) -> None:
        self._lines = lines
        self._kept: list[str] = []
        self.forced: str | None = None
        first = next(lines, None)
        if first is not None:
            first = first.lstrip("\ufeff")
            sep = _SEP_LINE.match(first.strip())
            if sep:
                # Spreadsheet programs write "sep=;" as a first line; keep the line count by leaving it blank.
                self.forced, first = sep.group(1), "\n"
            self._kept.append(first)

    def replay(self) -> Iterator[str]:
        """The lines from the top, reading (and keeping) more as they are needed."""
        position = 0
        while True:
            if position == len(self._kept):
                line = next(self._lines, None)
                if line is None:
                    return
                self._kept.append(line)
            yield self._kept[position]
            position += 1

    def rest(self) -> Iterator[str]:
        """Every line from the top once more, keeping none."""
        kept, self._kept = self._kept, []
        yield from kept
        yield from self._lines


_SEP_LINE = re.compile(r"^sep=(.)\s*$", re.IGNORECASE)


def read_rows(lines: Iterable[str], delimiter: str, source: object) -> Iterator[tuple[int, list[str]]]:
    """Non-blank rows with the file line each starts on, one at a time (an export may be large)."""
    reader = csv.reader(lines, delimiter=delimiter)
    line = 1
    try:
        for cells in reader:
            stripped = [cell.strip() for cell in cells]
            if any(stripped):
                yield line, stripped
            line = reader.line_num + 1
    except csv.Error as exc:
        raise InputError(source, f"line {reader.line_num}", f"cannot be split into cells ({exc})") from None
