"""Read initiatives from CSV text: header key,effort,value and optional mark columns."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

from .errors import SelectorInputError
from .model import Item
from .set_names import SetNames

REQUIRED_COLUMNS = ("key", "effort", "value")
OPTIONAL_COLUMNS = ("pinned", "ruled_out", "needs", "either_or")
_TRUE = {"true", "yes", "1", "y"}
_FALSE = {"false", "no", "0", "n", ""}
# Cells a spreadsheet would run as a formula when the file is opened again.
_FORMULA_START = ("=", "+", "@", "\t", "\r")


@dataclass(frozen=True)
class CsvItems:
    """Items read from a CSV file, the line each came from, and columns that were ignored."""

    items: tuple[Item, ...]
    rows: dict[str, int]
    ignored_columns: tuple[str, ...]


def _column_name(raw: str) -> str:
    return raw.strip().lower().replace("-", "_").replace(" ", "_")


def _error(row: int, key: str | None, field: str, problem: str) -> SelectorInputError:
    where = f"row {row}" + (f" (key {key!r})" if key else "")
    return SelectorInputError(f"{where}: {field} {problem}", field=field, key=key, row=row)


def _number(cell: str, row: int, key: str, field: str) -> float:
    text = cell.strip()
    try:
        return float(text)
    except ValueError:
        hint = " (use a point for decimals)" if "," in text else ""
        raise _error(row, key, field, f"must be a number, got {cell!r}{hint}") from None


def _flag(cell: str, row: int, key: str, field: str) -> bool:
    text = cell.strip().lower()
    if text in _TRUE:
        return True
    if text in _FALSE:
        return False
    raise _error(row, key, field, f"must be true/false, yes/no or 1/0, got {cell!r}")


def _text(cell: str, row: int, key: str | None, field: str) -> str:
    text = cell.strip()
    if text.startswith(_FORMULA_START) or cell.startswith(_FORMULA_START):
        raise _error(row, key, field, f"looks like a spreadsheet formula: {cell!r}")
    return text


def read_items_csv(text: str) -> CsvItems:
    """Parse CSV text into Items; raise SelectorInputError naming the row, key and column."""
    lines = list(csv.reader(io.StringIO(text.lstrip("\ufeff"))))
    header_at = next((n for n, cells in enumerate(lines) if any(c.strip() for c in cells)), None)
    if header_at is None:
        raise SelectorInputError(
            "the file is empty: expected a header key,effort,value", field="file"
        )
    header = [_column_name(cell) for cell in lines[header_at]]
    if len(header) == 1 and any(sep in lines[header_at][0] for sep in ";\t|"):
        raise SelectorInputError(
            f"row {header_at + 1}: the header {lines[header_at][0]!r} is not comma-separated; "
            "save the file as CSV with commas",
            field="file",
            row=header_at + 1,
        )
    missing = [name for name in REQUIRED_COLUMNS if name not in header]
    if missing:
        raise SelectorInputError(
            f"row {header_at + 1}: missing {'column' if len(missing) == 1 else 'columns'} "
            f"{', '.join(missing)}; the header must "
            "include key,effort,value",
            field=missing[0],
            row=header_at + 1,
        )
    repeated = sorted({name for name in header if name and header.count(name) > 1})
    if repeated:
        raise SelectorInputError(
            f"row {header_at + 1}: column {repeated[0]!r} appears more than once",
            field=repeated[0],
            row=header_at + 1,
        )
    known = set(REQUIRED_COLUMNS + OPTIONAL_COLUMNS)
    ignored = tuple(name for name in header if name and name not in known)
    position = {name: k for k, name in enumerate(header)}
    items: list[Item] = []
    rows: dict[str, int] = {}
    set_names = SetNames()
    for offset, cells in enumerate(lines[header_at + 1 :]):
        row = header_at + 2 + offset
        if not any(cell.strip() for cell in cells):
            continue
        if len(cells) != len(header):
            raise SelectorInputError(
                f"row {row}: has {len(cells)} cells but the header has {len(header)}",
                field="file",
                row=row,
            )

        def cell(name: str, cells: list[str] = cells) -> str:
            return cells[position[name]] if name in position else ""

        key = _text(cell("key"), row, None, "key")
        if not key:
            raise _error(row, None, "key", "is empty")
        if key in rows:
            raise _error(row, key, "key", f"is used again (first on row {rows[key]})")
        needs = tuple(
            _text(name, row, key, "needs") for name in cell("needs").replace(";", " ").split()
        )
        either_or = set_names.spelling(_text(cell("either_or"), row, key, "either_or") or None)
        items.append(
            Item(
                key=key,
                effort=_number(cell("effort"), row, key, "effort"),
                value=_number(cell("value"), row, key, "value"),
                pinned=_flag(cell("pinned"), row, key, "pinned"),
                ruled_out=_flag(cell("ruled_out"), row, key, "ruled_out"),
                needs=needs,
                either_or=either_or,
            )
        )
        rows[key] = row
    return CsvItems(tuple(items), rows, ignored)
