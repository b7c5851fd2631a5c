"""Exports of saved plans and comparisons (CSV, JSON, Markdown) and the plan CSV import.

CSV cells a spreadsheet could run as a formula are neutralised as the OWASP guidance on CSV
injection advises: every text cell starting with =, +, -, @, a tab or a carriage return gets
a leading single quote, and every cell is quoted. A text cell that already starts with a
single quote gets one more, so the importer can always strip exactly one and read back the
text as it was. Numbers Loadline writes itself are not text and are left as they are.

A plan CSV starts with a block of `name,value` rows (plan, team, period, capacity, the team's
spread of single-number estimates, totals), then an empty row, then one row per initiative
under a header. Importing it into an empty team creates the same initiatives, in the same
order, with the same estimates as entered, values, states, either-or sets and needs, and a
scenario holding the plan's capacity, confidence level and forced initiatives: solving that
scenario gives the same plan (at a confidence level, when the team spreads single estimates
as the file's team did; the import warns otherwise). Two things of the wider workspace do not
travel, and the import says so per initiative: work blocked by needs on initiatives outside
the plan (`blocked_by`) comes back ruled out, and effort other teams spend on an initiative
(`other_teams`, names only) is not recreated.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

from pydantic import ValidationError

from server.errors import InputError
from server.models import SavedPlan
from server.planning.compare import ComparedPlan, Comparison
from server.planning.scenarios import MAX_CAPACITY_DAYS, MIN_CAPACITY_DAYS
from server.planning.snapshots import PlanView, view_of
from server.schemas import EffortIn, InitiativeCreate
from server.validation import field_and_message
from server.wording import STATE_LABELS, days, in_days

# Whether a plan can be carried out at all, as a comparison says it.
FITS, OVERRUNS = "yes", "no: pinned work alone overruns"
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
MAX_IMPORT_ROWS = 2000
INITIATIVE_COLUMNS = (
    "key",
    "title",
    "in_plan",
    "low",
    "likely",
    "high",
    "planned_effort",
    "value",
    "state",
    "forced",
    "either_or",
    "needs",
    "blocked_by",
    "other_teams",
    "confidence",
    "reason",
)
REQUIRED_COLUMNS = ("key", "title", "likely", "value", "state")


def neutralise(cell: object) -> object:
    """Make a text cell safe to open in a spreadsheet; numbers pass through."""
    if not isinstance(cell, str):
        return cell
    if cell.startswith((*FORMULA_STARTS, "'")):
        return "'" + cell
    return cell


def restore(cell: str) -> str:
    """Undo `neutralise` on a cell read back from an exported file."""
    return cell[1:] if cell.startswith("'") else cell


def _number(value: object) -> object:
    """Numbers as a spreadsheet would show them (3, not 3.0); None as an empty cell."""
    if value is None:
        return ""
    if isinstance(value, float):
        # Float noise from arithmetic (21.599999999999998 for 18 x 1.2) is not a figure
        # anyone entered: ten significant digits keep every real one.
        value = float(f"{value:.10g}")
        if value.is_integer() and abs(value) < 1e15:
            return int(value)
    return value


def _write(rows: Iterable[Sequence[object]]) -> str:
    out = io.StringIO()
    writer = csv.writer(out, quoting=csv.QUOTE_ALL, lineterminator="\r\n")
    for row in rows:
        writer.writerow([neutralise(_number(cell)) for cell in row])
    return out.getvalue()


def _stamp(db_plan: SavedPlan) -> str:
    """The save time in UTC, to the second, without an offset (the text says UTC)."""
    at = db_plan.created_at
    if at.tzinfo is not None:
        at = at.astimezone(dt.UTC).replace(tzinfo=None)
    return at.replace(microsecond=0).isoformat(sep=" ")


def _is_live(db_plan: SavedPlan) -> bool:
    """A plan solved for the download and saved nowhere (it has no id): its time is when it
    was exported, not a save."""
    return db_plan.id is None


def _plan_preamble(db_plan: SavedPlan, view: PlanView) -> list[tuple[str, object]]:
    r = view.result
    when = "exported" if _is_live(db_plan) else "saved"
    return [
        ("plan", db_plan.name),
        ("team", view.team_names),
        ("period", view.inputs.period.name),
        (f"{when}_at", _stamp(db_plan) + " UTC"),
        (f"{when}_by", db_plan.created_by),
        ("scenario", r.scenario_name or ""),
        ("capacity_days", r.capacity),
        ("resolution", view.inputs.options.resolution),
        ("confidence", _number(r.confidence)),
        ("default_spread", view.inputs.teams[0].default_spread if view.inputs.teams else ""),
        ("value", r.value),
        ("effort", r.effort),
        ("headroom", r.headroom),
        ("feasible", "yes" if r.feasible else "no"),
        ("fit_probability", _number(r.fit.probability if r.fit else None)),
        ("method", r.method),
    ]


def _state_words(i: Any) -> str:
    """The state as the pages say it, and the scenario's forcing: "candidate, forced in"."""
    words = STATE_LABELS.get(i.state, i.state)
    return f"{words}, forced {i.forced}" if i.forced else words


def _estimate_cells(i: Any) -> tuple[object, object, object]:
    """The effort as entered: a single number stays single (the team's spread is a summary
    row), so an import keeps it single instead of turning the spread into a typed range."""
    e = i.effort
    if e.low is None or e.high is None:
        return "", e.likely, ""
    return e.low, e.likely, e.high


def plan_csv(db_plan: SavedPlan) -> str:
    """The plan as CSV: the summary block, an empty row, then one row per initiative."""
    view = view_of(db_plan.inputs, db_plan.result)
    rows: list[Sequence[object]] = [list(pair) for pair in _plan_preamble(db_plan, view)]
    rows.append([])
    rows.append(INITIATIVE_COLUMNS)
    chosen = set(view.result.chosen)
    for i in view.inputs.initiatives:
        low, likely, high = _estimate_cells(i)
        explanation = view.explanations.get(i.key)
        rows.append(
            [
                i.key,
                i.title,
                "yes" if i.key in chosen else "no",
                low,
                likely,
                high,
                i.planned_effort,
                i.value,
                i.state,
                i.forced or "",
                i.either_or or "",
                " ".join(i.needs),
                "; ".join(i.blocked_by),
                "; ".join(i.other_teams),
                _number(i.confidence),
                explanation.reason if explanation else "",
            ]
        )
    return _write(rows)


def plan_json(db_plan: SavedPlan) -> dict[str, Any]:
    return {
        "plan": {
            "id": db_plan.id,
            "name": db_plan.name,
            "team_ids": db_plan.team_ids,
            "period_id": db_plan.period_id,
            # A live plan's download (no id) was made then, not saved.
            ("exported_at" if _is_live(db_plan) else "created_at"): db_plan.created_at.isoformat(),
            ("exported_by" if _is_live(db_plan) else "created_by"): db_plan.created_by,
            "scenario_changes": db_plan.scenario_changes,
            "inputs_digest": db_plan.inputs_digest,
        },
        "inputs": db_plan.inputs,
        "result": db_plan.result,
    }


def json_text(document: dict[str, Any]) -> str:
    return json.dumps(document, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


# --- Markdown ------------------------------------------------------------------------------

_MARKDOWN_SPECIAL = "\\`*_[]<>|#~"


def md(text: object) -> str:
    """Escape text for a Markdown paragraph or table cell (one line, no markup, no HTML)."""
    value = " ".join(str(text).split())
    return "".join("\\" + ch if ch in _MARKDOWN_SPECIAL else ch for ch in value)


def _d(value: float | None) -> str:
    return days(value)


def _pct(value: float | None) -> str:
    return "–" if value is None else f"{value * 100:.0f} %"


def _level(confidence: float | None) -> str:
    return "likely estimates" if confidence is None else f"P{round(confidence * 100, 1):g}"


def _titled(i: Any) -> str:
    """The title, and the other teams that spend effort on it, as the saved plan page shows."""
    also = f" (also {md(', '.join(i.other_teams))})" if i.other_teams else ""
    return md(i.title) + also


def plan_markdown(db_plan: SavedPlan) -> str:
    view = view_of(db_plan.inputs, db_plan.result)
    r = view.result
    p = view.inputs.period
    lines = [
        f"# {md(db_plan.name)}",
        "",
        f"{md(view.team_names)} · {md(p.name)} ({p.start_date} to {p.end_date}) · "
        f"{'exported, not saved,' if _is_live(db_plan) else 'saved'} {_stamp(db_plan)} UTC"
        + (f" by {md(db_plan.created_by)}" if db_plan.created_by else ""),
        "",
        f"- Value: **{_d(r.value)}**",
        f"- Effort: {_d(r.effort)} of {_d(r.capacity)} days (headroom {in_days(r.headroom)}, "
        f"utilisation {_pct(r.utilisation)})",
        f"- Planned at: {_level(r.confidence)}",
        f"- Chance the chosen work fits: {md(r.fit.label) if r.fit else 'not estimated'}",
    ]
    if r.p50_value is not None:
        lines.append(f"- Value of the P50 plan: {_d(r.p50_value)}")
    if not r.feasible and r.infeasibility:
        lines.append(f"- Not feasible: {md(r.infeasibility)}")
    if r.changed_inputs:
        lines += ["", f"Scenario {md(r.scenario_name or '')}, changed inputs:", ""]
        lines += [f"- {md(text)}" for text in r.changed_inputs]
    lines += ["", f"## In the plan ({len(view.chosen)})", ""]
    lines += ["| Initiative | Effort (days) | Value | State |", "| --- | ---: | ---: | --- |"]
    lines += [
        f"| {_titled(i)} | {_d(i.planned_effort)} | {_d(i.value)} | {md(_state_words(i))} |"
        for i in view.chosen
    ]
    lines += ["", f"## Left out ({len(view.left_out)})", ""]
    lines += ["| Initiative | Effort (days) | Value | Why |", "| --- | ---: | ---: | --- |"]
    for i in view.left_out:
        e = view.explanations.get(i.key)
        lines.append(
            f"| {_titled(i)} | {_d(i.planned_effort)} | {_d(i.value)} | "
            f"{md(e.reason) if e else ''} |"
        )
    lines += ["", "Plans are estimates, not promises.", ""]
    return "\n".join(lines)


# --- comparison exports --------------------------------------------------------------------


def _figures(cmp: Comparison) -> list[tuple[str, list[object]]]:
    return [
        ("value", [p.value for p in cmp.plans]),
        ("effort_days", [p.effort for p in cmp.plans]),
        ("capacity_days", [p.capacity for p in cmp.plans]),
        ("headroom_days", [p.headroom for p in cmp.plans]),
        ("feasible", ["yes" if p.feasible else "no" for p in cmp.plans]),
        ("utilisation", [_number(p.utilisation) for p in cmp.plans]),
        ("confidence", [_number(p.confidence) for p in cmp.plans]),
        ("fit_probability", [_number(p.fit_probability) for p in cmp.plans]),
        ("changed_inputs", [p.changes_said for p in cmp.plans]),
    ]


def comparison_csv(cmp: Comparison) -> str:
    """Figures per plan, an empty row, then each initiative's in/out per plan."""
    heads = [f"{p.label}: {p.name}{_unsaved(p)}" for p in cmp.plans]
    rows: list[Sequence[object]] = [["figure", *heads]]
    rows += [[name, *values] for name, values in _figures(cmp)]
    rows.append([])
    rows.append(["key", "title", *heads])
    for i in cmp.initiatives:
        rows.append([i.key, i.title, *[cell or "" for cell in i.cells]])
    return _write(rows)


def _unsaved(plan: ComparedPlan) -> str:
    """Said after a plan's name when it was solved for the comparison and is saved nowhere."""
    if plan.id is not None:
        return ""
    return f" (solved {plan.created_at:%Y-%m-%d %H:%M} UTC, not saved)"


def comparison_json(cmp: Comparison) -> dict[str, Any]:
    return cmp.model_dump(mode="json")


def comparison_markdown(cmp: Comparison) -> str:
    labels = [p.label for p in cmp.plans]
    lines = ["# Plan comparison", ""]
    lines += [
        f"- **{p.label}**: {md(p.name)} ({md(p.team_names)}, {md(p.period_name)}){_unsaved(p)}"
        for p in cmp.plans
    ]
    lines += ["", "| | " + " | ".join(labels) + " |", "| --- |" + " ---: |" * len(labels)]
    rows = [
        ("Value", [_d(p.value) for p in cmp.plans]),
        ("Effort (days)", [_d(p.effort) for p in cmp.plans]),
        ("Capacity (days)", [_d(p.capacity) for p in cmp.plans]),
        ("Headroom (days)", [_d(p.headroom) for p in cmp.plans]),
        ("Fits the capacity", [FITS if p.feasible else OVERRUNS for p in cmp.plans]),
        ("Utilisation", [_pct(p.utilisation) for p in cmp.plans]),
        ("Planned at", [_level(p.confidence) for p in cmp.plans]),
        ("Chance it fits", [md(p.fit_label) if p.fit_label else "–" for p in cmp.plans]),
        ("Changed inputs", [md(p.changes_said) for p in cmp.plans]),
    ]
    lines += [f"| {name} | " + " | ".join(values) + " |" for name, values in rows]
    lines += ["", "## Differences", ""]
    for pair in cmp.pairs:
        a = ", ".join(md(cmp.titles[k]) for k in pair.only_in_a) or "nothing"
        b = ", ".join(md(cmp.titles[k]) for k in pair.only_in_b) or "nothing"
        lines.append(f"- In {pair.a} not in {pair.b}: {a}")
        lines.append(f"- In {pair.b} not in {pair.a}: {b}")
    common = ", ".join(md(cmp.titles[k]) for k in cmp.in_all) or "nothing"
    lines += ["", f"In every plan: {common}", ""]
    return "\n".join(lines)


# --- importing a plan CSV ------------------------------------------------------------------


@dataclass(frozen=True)
class ImportedRow:
    line: int
    key: str
    initiative: InitiativeCreate  # no period and no needs: the importer fills them in
    needs: list[str]
    forced: str | None
    was_blocked: bool


@dataclass(frozen=True)
class ImportedPlan:
    plan_name: str
    capacity_days: float
    confidence: float | None
    rows: list[ImportedRow]
    warnings: list[str] = field(default_factory=list)
    # The planning team's spread of single-number estimates (files before it: None).
    default_spread: float | None = None


def _fail(line: int, column: str, message: str) -> InputError:
    return InputError(f"csv: Line {line}, {column}: {message}", field="csv")


def _float(line: int, column: str, raw: str, *, required: bool) -> float | None:
    text = raw.strip()
    if not text:
        if required:
            raise _fail(line, column, "a number is required.")
        return None
    try:
        value = float(text)
    except ValueError:
        raise _fail(line, column, f"“{text}” is not a number.") from None
    if value != value or value in (float("inf"), float("-inf")):
        raise _fail(line, column, "must be a finite number.")
    return value


def _preamble(rows: list[tuple[int, list[str]]]) -> tuple[dict[str, str], int]:
    values: dict[str, str] = {}
    for index, (line, row) in enumerate(rows):
        if not any(cell.strip() for cell in row):
            return values, index + 1
        if len(row) < 2:
            raise _fail(
                line,
                "summary",
                "expected `name,value` rows before the empty row (is the delimiter a comma?).",
            )
        values[restore(row[0]).strip()] = restore(row[1])
    raise InputError(
        "csv: No empty row after the summary block; this is not a Loadline plan export.",
        field="csv",
    )


def _needs_cycle(rows: list[ImportedRow]) -> list[str] | None:
    graph = {r.key: r.needs for r in rows}
    state: dict[str, int] = {}
    path: list[str] = []

    def visit(key: str) -> list[str] | None:
        state[key] = 1
        path.append(key)
        for nxt in graph.get(key, []):
            if state.get(nxt) == 1:
                return [*path[path.index(nxt) :], nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        path.pop()
        state[key] = 2
        return None

    for key in graph:
        if key not in state:
            found = visit(key)
            if found:
                return found
    return None


def parse_plan_csv(text: str, *, team_id: int) -> ImportedPlan:
    """Read a plan CSV written by `plan_csv` as initiatives of team `team_id`; refuse it with
    the line and column named."""
    text = text.removeprefix("\ufeff")
    try:
        raw_rows = list(csv.reader(io.StringIO(text, newline="")))
    except csv.Error as exc:
        raise InputError(f"csv: The file cannot be read as CSV ({exc}).", field="csv") from exc
    numbered = [(i + 1, row) for i, row in enumerate(raw_rows)]
    summary, start = _preamble(numbered)
    if "capacity_days" not in summary:
        raise InputError("csv: The summary block has no capacity_days row.", field="csv")
    capacity = _float(0, "capacity_days", summary["capacity_days"], required=True) or 0.0
    if not MIN_CAPACITY_DAYS <= capacity <= MAX_CAPACITY_DAYS:
        raise InputError(
            f"csv: The capacity_days value must be from {MIN_CAPACITY_DAYS:g} to "
            f"{MAX_CAPACITY_DAYS:g}.",
            field="csv",
        )
    confidence = _float(0, "confidence", summary.get("confidence", ""), required=False)
    if confidence is not None and not 0 < confidence < 1:
        raise InputError(
            "csv: The confidence value must be between 0 and 1 (e.g. 0.8).", field="csv"
        )
    if start >= len(numbered):
        raise InputError("csv: The initiative header row is missing.", field="csv")
    header_line, header = numbered[start]
    columns = [restore(c).strip().lower() for c in header]
    missing = [c for c in REQUIRED_COLUMNS if c not in columns]
    if missing:
        raise _fail(
            header_line,
            "header",
            f"missing {'column' if len(missing) == 1 else 'columns'}: {', '.join(missing)}.",
        )
    if len(set(columns)) != len(columns):
        raise _fail(header_line, "header", "a column name appears twice.")
    body = [(line, row) for line, row in numbered[start + 1 :] if any(c.strip() for c in row)]
    if len(body) > MAX_IMPORT_ROWS:
        raise InputError(
            f"csv: At most {MAX_IMPORT_ROWS} initiatives per import (got {len(body)}).",
            field="csv",
        )
    rows: list[ImportedRow] = []
    seen: set[str] = set()
    warnings: list[str] = []
    for line, raw in body:
        if len(raw) != len(columns):
            raise _fail(line, "row", f"has {len(raw)} cells, the header has {len(columns)}.")
        cell = {name: restore(value) for name, value in zip(columns, raw, strict=True)}
        key = cell["key"].strip()
        if not key:
            raise _fail(line, "key", "is empty.")
        if key in seen:
            raise _fail(line, "key", f"“{key}” appears twice.")
        seen.add(key)
        low = _float(line, "low", cell.get("low", ""), required=False)
        likely = _float(line, "likely", cell["likely"], required=True)
        high = _float(line, "high", cell.get("high", ""), required=False)
        effort: dict[str, Any] = {"likely": likely}
        if low is not None or high is not None:
            effort |= {"low": low, "high": high}
        blocked = bool(cell.get("blocked_by", "").strip())
        state = cell["state"].strip()
        confidence_raw = _float(line, "confidence", cell.get("confidence", ""), required=False)
        forced = cell.get("forced", "").strip() or None
        if forced not in (None, "in", "out"):
            raise _fail(line, "forced", "must be in, out or empty.")
        if cell.get("in_plan", "").strip().lower() not in ("", "yes", "no"):
            # Not read (the import solves the plan again), but a changed cell is a change
            # someone meant: say where such a change goes rather than drop it unread.
            raise _fail(
                line, "in_plan", "must be yes, no or empty; to force a row in or out, use forced."
            )
        try:
            initiative = InitiativeCreate(
                team_id=team_id,
                title=cell["title"],
                effort=EffortIn.model_validate(effort),
                value=_float(line, "value", cell["value"], required=True) or 0.0,
                state="ruled_out" if blocked else state,  # type: ignore[arg-type]
                either_or=cell.get("either_or") or None,
                confidence=confidence_raw,
            )
        except ValidationError as exc:
            column, message = field_and_message(exc.errors()[0])
            raise _fail(line, column, message) from exc
        if blocked:
            warnings.append(
                f"“{initiative.title}” was blocked by needs outside the plan; imported as "
                "ruled out."
            )
        others = cell.get("other_teams", "").strip()
        if others:
            warnings.append(
                f"“{initiative.title}” also took effort from {others.replace(';', ',')}; only "
                "this team's effort was imported. Add the other teams' effort on its edit page."
            )
        rows.append(
            ImportedRow(
                line=line,
                key=key,
                initiative=initiative,
                needs=cell.get("needs", "").split(),
                forced=forced,
                was_blocked=blocked,
            )
        )
    for row in rows:
        unknown = [k for k in row.needs if k not in seen]
        if unknown:
            raise _fail(row.line, "needs", f"no row with key {', '.join(unknown)}.")
    cycle = _needs_cycle(rows)
    if cycle:
        raise InputError(f"csv: Needs form a cycle: {' → '.join(cycle)}.", field="csv")
    spread = _float(0, "default_spread", summary.get("default_spread", ""), required=False)
    if spread is not None and not 0 <= spread < 1:
        raise InputError("csv: The default_spread value must be from 0 to below 1.", field="csv")
    return ImportedPlan(
        plan_name=summary.get("plan", "").strip(),
        capacity_days=capacity,
        confidence=confidence,
        rows=rows,
        warnings=warnings,
        default_spread=spread,
    )
