"""CSV tables with units in the header, read strictly and written atomically.

Header cells are ``name [unit]``, e.g. ``x [mm]``, ``roll [deg]``, ``gripper`` (no unit for
text or dimensionless columns).  :func:`read_table` checks the columns a caller needs, their
dimensions, and every cell, and raises :class:`TableError` naming the row and column of the
first problems found (up to 20).
"""

from __future__ import annotations

import csv
import io
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping

import numpy as np

from .design import atomic_write_text
from .limits import MAGNITUDE, MAX_TABLE_BYTES, MAX_TABLE_CELL, MAX_TABLE_ROWS
from .units import DIMENSIONS, UnitError, parse_quantity, unit_factor

__all__ = ["TableError", "Column", "Table", "read_table", "write_table"]

_CELL_NUMBER = re.compile(r"[-+]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][-+]?[0-9]+)?|[-+]?(?:inf|infinity|nan)",
                          re.ASCII | re.IGNORECASE)
_HEADER = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_ ]*?)\s*(?:\[\s*([^\]]*)\s*\])?\s*$")


class TableError(ValueError):
    """A CSV that cannot be used; the message names the rows and columns."""


@dataclass(frozen=True)
class Column:
    """A column a reader expects: its name, dimension (a key of units.DIMENSIONS, or
    ``"text"``), and whether it must be present."""

    name: str
    dimension: str
    required: bool = True


@dataclass(frozen=True)
class Table:
    """Parsed columns (SI floats for quantities, strings for text), one entry per data row.

    ``lines`` gives the file line number of every row (for messages).
    """

    columns: Mapping[str, np.ndarray]
    lines: np.ndarray
    source: str

    def __len__(self) -> int:
        return len(self.lines)

    def has(self, name: str) -> bool:
        return name in self.columns


def read_table(path_or_text, columns: list[Column], *, source: str | None = None, min_rows: int = 1,
               allow_extra: bool = False) -> Table:
    """Read a CSV with unit-bearing headers.

    Parameters
    ----------
    path_or_text : path to a file, or a ``io.StringIO``.
    columns : the expected columns.
    min_rows : fewest data rows accepted.
    allow_extra : accept (and ignore) columns not listed.
    """
    if isinstance(path_or_text, io.StringIO):
        text = path_or_text.getvalue()
        src = source or "<text>"
    else:
        p = Path(path_or_text)
        src = source or str(p)
        try:
            if p.exists() and not p.is_file():
                raise TableError(f"{src}: not a regular file (a folder, pipe or device); give a CSV file")
            if p.stat().st_size > MAX_TABLE_BYTES:
                raise TableError(f"{src}: {p.stat().st_size:,} bytes; at most {MAX_TABLE_BYTES:,} "
                                 "(cablekit.limits.MAX_TABLE_BYTES)")
            raw = p.read_bytes()
        except FileNotFoundError:
            raise TableError(f"{src}: file not found") from None
        except OSError as exc:
            raise TableError(f"{src}: cannot read ({exc.strerror or exc})") from None
        if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
            raise TableError(f"{src}: the file is UTF-16 text; save it again as UTF-8")
        try:
            text = raw.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise TableError(f"{src}: cannot read as UTF-8 text ({exc})") from None
    if len(text) > MAX_TABLE_BYTES:
        raise TableError(f"{src}: {len(text):,} characters; at most {MAX_TABLE_BYTES:,} (cablekit.limits.MAX_TABLE_BYTES)")
    rows = []
    reader = csv.reader(io.StringIO(text))
    try:
        for k, r in enumerate(reader):
            if any(len(cell) > MAX_TABLE_CELL for cell in r):
                raise TableError(f"{src} line {reader.line_num}: a cell longer than {MAX_TABLE_CELL:,} characters "
                                 "(cablekit.limits.MAX_TABLE_CELL)")
            rows.append((k + 1, r))
            if len(rows) > MAX_TABLE_ROWS + 1 + 1000:  # header and comment lines on top of the data rows
                break
    except csv.Error as exc:
        raise TableError(f"{src} line {reader.line_num}: not a readable CSV ({exc})") from None
    rows = [(n, r) for n, r in rows if r and any(c.strip() for c in r) and not r[0].lstrip().startswith("#")]
    if not rows:
        raise TableError(f"{src}: empty file; expected a header row such as "
                         f"{', '.join(_hint(c) for c in columns if c.required)}")
    header_line, header = rows[0]
    data = rows[1:]
    if len(data) > MAX_TABLE_ROWS:
        raise TableError(f"{src}: more than {MAX_TABLE_ROWS:,} data rows (cablekit.limits.MAX_TABLE_ROWS); "
                         "split the file")
    problems: list[str] = []
    found: dict[str, tuple[int, str]] = {}
    for k, cell in enumerate(header):
        m = _HEADER.match(cell)
        if not m:
            problems.append(f"{src} line {header_line}, column {k + 1}: header {cell!r} is not 'name [unit]'")
            continue
        name, unit = m.group(1).strip(), (m.group(2) or "").strip()
        if name in found:
            problems.append(f"{src} line {header_line}: column {name!r} appears twice")
        found[name] = (k, unit)
    spec = {c.name: c for c in columns}
    for c in columns:
        if c.required and c.name not in found:
            problems.append(f"{src}: missing column {_hint(c)!r}")
    for name in found:
        if name not in spec and not allow_extra:
            problems.append(f"{src}: unknown column {name!r}; expected {', '.join(_hint(c) for c in columns)}")
    factors: dict[str, float] = {}
    for name, (k, unit) in found.items():
        c = spec.get(name)
        if c is None or c.dimension == "text":
            continue
        if c.dimension == "dimensionless":
            factors[name] = 1.0
            if unit:
                problems.append(f"{src}: column {name!r} takes no unit, got [{unit}]")
            continue
        if not unit:
            problems.append(f"{src}: column {name!r} has no unit; write it as {_hint(c)!r}")
            continue
        try:
            parse_quantity(f"1 {unit}", c.dimension, field=name)
            factors[name] = unit_factor(unit)
        except (UnitError, Exception) as exc:  # unit_factor may raise pint errors
            problems.append(f"{src}: column {name!r}: unit [{unit}] is not a {c.dimension.replace('_', ' ')} unit ({exc})")
    if problems:
        raise TableError("\n".join(problems[:20]))
    if len(data) < min_rows:
        raise TableError(f"{src}: {len(data)} data row{'s' if len(data) != 1 else ''}; at least {min_rows} needed")
    out: dict[str, list] = {name: [] for name in found if name in spec}
    for line, row in data:
        if len(row) != len(header):
            problems.append(f"{src} line {line}: {len(row)} cells, header has {len(header)}")
            continue
        for name, (k, unit) in found.items():
            c = spec.get(name)
            if c is None:
                continue
            cell = row[k].strip()
            if c.dimension == "text":
                out[name].append(cell)
                continue
            if not _CELL_NUMBER.fullmatch(cell):
                problems.append(f"{src} line {line}, column {name!r}: {cell!r} is not a number "
                                "(digits 0-9, optional sign, point and exponent)")
                continue
            v = float(cell)
            if not math.isfinite(v):
                problems.append(f"{src} line {line}, column {name!r}: {cell!r} is not a finite number")
                continue
            v = v * factors[name] if c.dimension != "dimensionless" else v
            high = MAGNITUDE[c.dimension][1]
            if not abs(v) <= high:
                problems.append(f"{src} line {line}, column {name!r}: {cell!r} is larger than "
                                f"{high:g}{(' ' + DIMENSIONS[c.dimension][0]) if DIMENSIONS[c.dimension][0] else ''} "
                                "in size (cablekit.limits.MAGNITUDE)")
                continue
            out[name].append(v)
        if len(problems) >= 20:
            break
    if problems:
        raise TableError("\n".join(problems[:20]))
    cols = {name: (np.array(v, dtype=object) if spec[name].dimension == "text" else np.array(v, dtype=float))
            for name, v in out.items()}
    return Table(columns=cols, lines=np.array([n for n, _ in data]), source=src)


def _hint(c: Column) -> str:
    from .units import DIMENSIONS

    if c.dimension in ("text", "dimensionless"):
        return c.name
    unit = {"length": "mm", "angle": "deg", "force": "N", "time": "s"}.get(c.dimension, DIMENSIONS[c.dimension][0])
    return f"{c.name} [{unit}]"


def write_table(path, header: list[str], rows, *, comment: str | None = None) -> Path:
    """Write rows under ``header`` atomically; floats are written with repr precision."""
    buf = io.StringIO()
    if comment:
        for line in comment.splitlines():
            buf.write(f"# {line}\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for r in rows:
        w.writerow([repr(float(v)) if isinstance(v, (float, np.floating)) else v for v in r])
    return atomic_write_text(path, buf.getvalue())
