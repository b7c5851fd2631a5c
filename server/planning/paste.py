"""Rows pasted from a spreadsheet: parse, check each row, and store them all or none.

Accepted shapes (tab-, semicolon- or comma-separated: tab when any line has one, otherwise
whichever of semicolon and comma splits the most lines into one same number of cells, with
more cells and then semicolon winning a tie, so one "Alerts; phase 2" title among
comma-separated rows does not switch every row to semicolons):

- with a header row naming the columns: title, effort (or low, likely, high), value, state;
- without a header, by the number of columns: 3 = title, effort, value; 4 = ... , state;
  5 = title, low, likely, high, value; 6 = ... , state.

An effort cell holds one number of days, or low/likely/high as "3/5/8". A state cell is
candidate, pinned or ruled out (blank means candidate). Tab- and semicolon-separated text may
use a decimal comma ("2,5"), as spreadsheets in many locales copy it.
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from typing import Any

from sqlmodel import Session

from server.errors import InputError
from server.schemas import InitiativeCreate
from server.store import audit
from server.store.initiatives import TitlesInUse, create_initiatives, title_key
from server.validation import REQUIRED_MESSAGE, parse_form
from server.wording import counted

MAX_ROWS = 500
FIELDS = ("title", "effort", "value", "state")
STATE_WORDS = {
    "": "candidate",
    "candidate": "candidate",
    "pinned": "pinned",
    "ruled out": "ruled_out",
    "ruled_out": "ruled_out",
    "ruled-out": "ruled_out",
}
_HEADER_NAMES = {
    "title": "title",
    "name": "title",
    "initiative": "title",
    "effort": "effort",
    "effort (days)": "effort",
    "days": "effort",
    "estimate": "effort",
    "low": "low",
    "likely": "likely",
    "high": "high",
    "value": "value",
    "value score": "value",
    "score": "value",
    "state": "state",
}
_LAYOUTS: dict[int, tuple[str, ...]] = {
    3: ("title", "effort", "value"),
    4: ("title", "effort", "value", "state"),
    5: ("title", "low", "likely", "high", "value"),
    6: ("title", "low", "likely", "high", "value", "state"),
}
_DELIMITERS = (("\t", "tab"), (";", "semicolon"), (",", "comma"))
_FORMULA = re.compile(r"^(?:[=@]|[+-][A-Za-z_]+\()")
_DECIMAL_COMMA = re.compile(r"^\s*[+-]?\d+,\d+\s*$")
# "2,500" or "1,000,000": a thousands separator as often as a decimal comma; never guessed.
_THOUSANDS_LIKE = re.compile(r"^\s*[+-]?\d{1,3}(?:,\d{3})+\s*$")
_NUMBER_CELL = re.compile(r"^\s*[+-]?\d+(?:\.\d+)?\s*$")


@dataclass(frozen=True)
class PastedRow:
    """One pasted line: the cells as typed, what they became, and what is wrong with them."""

    line: int
    title: str
    effort: str
    value: str
    state: str
    initiative_in: InitiativeCreate | None
    errors: dict[str, str] = field(default_factory=dict)  # field (FIELDS) -> message

    @property
    def ok(self) -> bool:
        return self.initiative_in is not None and not self.errors

    @property
    def read_effort(self) -> str:
        """The effort as it will be stored, in days ("" while the row is refused)."""
        if self.initiative_in is None:
            return ""
        e = self.initiative_in.effort
        parts = (e.low, e.likely, e.high) if e.low is not None else (e.likely,)
        return "/".join(f"{part:g}" for part in parts if part is not None)

    @property
    def read_value(self) -> str:
        return f"{self.initiative_in.value:g}" if self.initiative_in is not None else ""


@dataclass(frozen=True)
class PasteResult:
    rows: tuple[PastedRow, ...]
    delimiter: str  # "tab", "semicolon" or "comma"
    header: bool
    columns: tuple[str, ...]
    problems: tuple[str, ...]  # errors of the block as a whole

    @property
    def ok(self) -> bool:
        return bool(self.rows) and not self.problems and all(row.ok for row in self.rows)

    @property
    def error_count(self) -> int:
        return sum(1 for row in self.rows if not row.ok)


# An effort typed in one field ("5" or "3/5/8") that is not a number: say what is accepted.
EFFORT_TEXT_RULE = "Enter a number of days, or low/likely/high such as 3/5/8."
_NOT_A_NUMBER = {"Enter a number.", "Enter a finite number."}
# A blank cell, said about the cell: a pasted row has cells, not form fields.
_EMPTY_CELL = {
    "effort": f"The effort cell is empty. {EFFORT_TEXT_RULE}",
    "likely": "The likely cell is empty. Enter a number of days.",
    "value": "The value cell is empty. Enter a number.",
}


def effort_text_message(message: str) -> str:
    """The message for an effort typed as text: a bad number names both accepted forms."""
    return EFFORT_TEXT_RULE if message in _NOT_A_NUMBER else message


def effort_fields(text: str) -> dict[str, Any]:
    """Turn "5" into {"likely": "5"} and "3/5/8" into low, likely and high (still text)."""
    if not text.strip():
        return {}  # reported as a missing effort, not as a bad number
    parts = [part.strip() for part in text.split("/")]
    if len(parts) == 3:
        return {"low": parts[0], "likely": parts[1], "high": parts[2]}
    return {"likely": text.strip()}


def _field_of(name: str) -> str:
    """Name a pydantic error location by the pasted column it came from."""
    head = name.split(".")[0]
    return head if head in FIELDS else "effort" if head in {"low", "likely", "high"} else head


def _number_text(cell: str, decimal_comma: bool) -> str:
    if decimal_comma and _DECIMAL_COMMA.match(cell):
        return cell.replace(",", ".")
    return cell


def decimal_point(text: str) -> str:
    """A number typed into a field with a decimal comma ("3,5"), as the paste reads it: one
    field holds one number, so the comma can only be decimal, unless it groups thousands
    ("2,500" is left as typed, and refused)."""
    return _number_text(text, not _THOUSANDS_LIKE.match(text))


def typed_effort_fields(text: str) -> dict[str, Any]:
    """effort_fields for an effort typed into a form field, decimal commas read as points."""
    return {key: decimal_point(part) for key, part in effort_fields(text).items()}


def _cell_counts(text: str, delimiter: str) -> list[int]:
    """How many cells each non-blank line has when split by `delimiter` (quotes honoured)."""
    counts = []
    try:
        for cells in csv.reader(io.StringIO(text), delimiter=delimiter, skipinitialspace=True):
            if any(cell.strip() for cell in cells):
                counts.append(len(cells))
    except csv.Error:
        return []
    return counts


def _delimiter_of(text: str) -> tuple[str, str]:
    """The delimiter the text is separated by, and its name (see the module's docstring)."""
    if "\t" in text:
        return "\t", "tab"
    best: tuple[int, int, int] | None = None
    chosen = ",", "comma"
    for rank, (char, label) in enumerate(_DELIMITERS[1:]):
        counts = [n for n in _cell_counts(text, char) if n > 1]
        if not counts:
            continue
        modal = max(set(counts), key=lambda n: (counts.count(n), n))
        score = (counts.count(modal), modal, -rank)
        if best is None or score > best:
            best, chosen = score, (char, label)
    return chosen


def _split(text: str) -> tuple[list[tuple[int, list[str]]], str, str]:
    delimiter, name = _delimiter_of(text)
    reader = csv.reader(io.StringIO(text), delimiter=delimiter, skipinitialspace=True, strict=True)
    rows: list[tuple[int, list[str]]] = []
    try:
        for cells in reader:
            trimmed = [cell.strip() for cell in cells]
            while trimmed and not trimmed[-1]:
                trimmed.pop()
            if trimmed:
                rows.append((reader.line_num, trimmed))
    except csv.Error as exc:  # e.g. an unclosed quote
        raise InputError(
            f"text: Line {reader.line_num} could not be read ({exc}).", field="text"
        ) from exc
    return rows, delimiter, name


def _header_columns(cells: list[str]) -> tuple[str, ...] | None:
    names = [cell.strip().lower() for cell in cells]
    if not names or names[0] not in {"title", "name", "initiative"}:
        return None
    return tuple(_HEADER_NAMES.get(name, f"?{cells[k]}") for k, name in enumerate(names))


def _layout_problems(columns: tuple[str, ...]) -> list[str]:
    problems = [
        f"The column “{name[1:]}” is not one Loadline reads; use title, effort (or low, likely "
        "and high), value and state."
        for name in columns
        if name.startswith("?")
    ]
    has_effort = "effort" in columns or "likely" in columns
    for needed, present in (("title", "title" in columns), ("value", "value" in columns)):
        if not present:
            problems.append(f"The header has no {needed} column.")
    if not has_effort:
        problems.append("The header has no effort column (effort, or low, likely and high).")
    return problems


def parse_paste(
    text: str, *, team_id: int, period_id: int | None, titles_in_use: TitlesInUse | None = None
) -> PasteResult:
    """Check every pasted row against the same rules as the forms; store nothing.

    titles_in_use, the team's titles in the period, refuses rows that would repeat one (the
    store refuses them too; here each is named on its line before anything is sent).
    """
    lines, delimiter, delimiter_name = _split(text)
    decimal_comma = delimiter != ","
    header = False
    columns: tuple[str, ...] = ()
    problems: list[str] = []
    if lines:
        from_header = _header_columns(lines[0][1])
        if from_header is not None:
            header = True
            columns = from_header
            lines = lines[1:]
            problems.extend(_layout_problems(columns))
        else:
            width = max(len(cells) for _, cells in lines)
            if width not in _LAYOUTS:
                problems.append(
                    f"Rows have {width} columns; paste 3 (title, effort, value), 4 (with state), "
                    "5 (title, low, likely, high, value) or 6 (with state), or start with a "
                    "header row naming the columns."
                )
            columns = _LAYOUTS.get(width, _LAYOUTS[4])
    if not lines:
        problems.append("There are no rows to add.")
    if len(lines) > MAX_ROWS:
        problems.append(f"{len(lines)} rows is more than the {MAX_ROWS} one paste can add.")
    seen: dict[str, int] = {}
    rows = []
    for line, cells in lines[:MAX_ROWS]:
        row = _parse_row(
            line, cells, columns, decimal_comma, team_id, period_id, seen, titles_in_use
        )
        rows.append(row)
    return PasteResult(
        rows=tuple(rows),
        delimiter=delimiter_name,
        header=header,
        columns=columns,
        problems=tuple(problems),
    )


def _parse_row(
    line: int,
    cells: list[str],
    columns: tuple[str, ...],
    decimal_comma: bool,
    team_id: int,
    period_id: int | None,
    seen: dict[str, int],
    titles_in_use: TitlesInUse | None,
) -> PastedRow:
    by_column = {name: (cells[k] if k < len(cells) else "") for k, name in enumerate(columns)}
    errors: dict[str, str] = {}
    if len(cells) > len(columns):
        errors["row"] = (
            f"has {len(cells)} cells, more than the {len(columns)} columns read "
            f"({', '.join(columns)})."
        )
    title = by_column.get("title", "")
    if "effort" in columns:
        effort_text = by_column.get("effort", "")
        effort = effort_fields(_number_text(effort_text, decimal_comma))
        if effort_text.count("/") not in (0, 2):
            errors["effort"] = EFFORT_TEXT_RULE
    else:
        parts = [by_column.get(name, "") for name in ("low", "likely", "high")]
        effort_text = "/".join(parts) if parts[0] or parts[2] else parts[1]
        effort = {"likely": _number_text(parts[1], decimal_comma)} if parts[1] else {}
        if parts[0] or parts[2]:
            effort |= {
                "low": _number_text(parts[0], decimal_comma) or None,
                "high": _number_text(parts[2], decimal_comma) or None,
            }
    value_text = by_column.get("value", "")
    state_text = by_column.get("state", "")
    for name, cell in (("title", title), ("effort", effort_text), ("value", value_text)):
        if _FORMULA.match(cell) and name not in errors:
            errors[name] = "Looks like a spreadsheet formula; paste the values instead."
    if decimal_comma:
        for name, cell in (("effort", effort_text), ("value", value_text)):
            ambiguous = [part for part in cell.split("/") if _THOUSANDS_LIKE.match(part)]
            if ambiguous and name not in errors:
                shown = ambiguous[0].strip()
                whole = shown.replace(",", "")
                if shown.count(",") > 1:
                    errors[name] = f"“{shown}”: write {whole}, without the commas."
                else:
                    point = f"{float(shown.replace(',', '.')):g}"
                    errors[name] = (
                        f"“{shown}” could be {whole} or {point}: write {whole} without the "
                        f"comma, or {point} with a point."
                    )
    state = STATE_WORDS.get(" ".join(state_text.lower().split()))
    if state is None:
        errors["state"] = f"“{state_text}” is not a state; use candidate, pinned or ruled out."
        if not decimal_comma and _NUMBER_CELL.match(state_text):
            # Cells split at commas: "2,500" became two cells, and the value took the state's.
            errors["state"] += (
                " Between cells split at commas, a number written with a comma (2,500 or "
                "2,5) becomes two cells: write 2500, or 2.5."
            )
    values = {
        "team_id": team_id,
        "period_id": period_id,
        "title": title,
        "effort": effort,
        "state": state or "candidate",
    }
    if value_text:  # a blank value is reported as missing
        values["value"] = _number_text(value_text, decimal_comma)
    initiative_in, refused = parse_form(InitiativeCreate, values)
    for name, message in refused.items():
        field = _field_of(name)
        one_cell = field == "effort" and "effort" in columns
        if message == REQUIRED_MESSAGE:
            message = _EMPTY_CELL.get(field if one_cell or field != "effort" else "likely", message)
        errors.setdefault(field, effort_text_message(message) if one_cell else message)
    key = title_key(title)
    clash = titles_in_use.clash(title) if key and titles_in_use is not None else None
    if key and key in seen:
        errors.setdefault("title", f"The same title as line {seen[key]}.")
    elif key:
        seen[key] = line
    if clash is not None:
        errors.setdefault("title", clash)
    return PastedRow(
        line=line,
        title=title,
        effort=effort_text,
        value=value_text,
        state=state_text,
        initiative_in=initiative_in if not errors else None,
        errors=errors,
    )


def commit_paste(session: Session, result: PasteResult, *, actor: str = "") -> list[int]:
    """Store every row in one transaction, or none of them; return the new ids in order.

    An `initiative.paste` audit entry groups the rows, so one undo removes the whole paste.
    """
    if not result.ok:
        have = "has" if result.error_count == 1 else "have"
        raise InputError(
            f"text: {counted(result.error_count, 'row')} {have} errors; nothing was added.",
            field="text",
        )
    initiatives_in = [row.initiative_in for row in result.rows if row.initiative_in is not None]
    try:
        # One batch: a fixed number of statements however many rows were pasted.
        created = create_initiatives(session, initiatives_in=initiatives_in, actor=actor)
        ids = [record.row.id or 0 for record in created]
        team_id = result.rows[0].initiative_in.team_id if result.rows[0].initiative_in else None
        audit.record(
            session,
            actor=actor,
            action="initiative.paste",
            entity="initiative",
            entity_id=None,
            team_id=team_id,
            summary=f"Pasted {counted(len(ids), 'initiative')}",
            after={"initiative_ids": ids},
        )
        session.commit()
    except Exception:  # all or nothing: a refused row or a database error stores none
        session.rollback()
        raise
    return ids
