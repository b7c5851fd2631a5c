"""`loadline select FILE.csv --capacity DAYS`: solve a CSV of initiatives without the server.

Exit codes: 0 a plan was found, 1 pinned work alone exceeds the capacity, 2 bad input.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import TextIO

from .csv_input import read_items_csv
from .errors import SelectorInputError
from .model import Problem, Selection
from .results import format_days
from .serialize import selection_to_dict
from .solve import default_curve_to, solve

EXIT_OK = 0
EXIT_INFEASIBLE = 1
EXIT_BAD_INPUT = 2


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="loadline select",
        description="Choose the value-optimal set of initiatives that fits a capacity.",
        epilog="CSV header: key,effort,value and optionally pinned,ruled_out,needs,either_or. "
        "needs lists keys separated by ';' or spaces; marks are true/false, yes/no or 1/0.",
    )
    parser.add_argument("file", metavar="FILE.csv", help="initiatives to choose from")
    parser.add_argument("--capacity", required=True, type=float, metavar="DAYS", help="person-days")
    parser.add_argument(
        "--resolution", type=float, default=0.5, metavar="R", help="effort grain in days (0.5)"
    )
    parser.add_argument("--json", action="store_true", help="print the full result as JSON")
    parser.add_argument(
        "--curve", action="store_true", help="add the capacity curve up to capacity + 25 %%"
    )
    parser.add_argument("--curve-to", type=float, metavar="DAYS", help="end the curve here")
    parser.add_argument("--explain", action="store_true", help="explain every in/out decision")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the select command on argv (the words after `select`); return the exit code."""
    try:
        args = _parser().parse_args(argv)
    except SystemExit as stop:  # argparse reports usage errors itself and exits with 2
        return int(stop.code or 0)
    rows: dict[str, int] = {}
    try:
        try:
            text = Path(args.file).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as error:
            print(f"loadline select: cannot read {args.file}: {error}", file=sys.stderr)
            return EXIT_BAD_INPUT
        parsed = read_items_csv(text)
        rows = parsed.rows
        if parsed.ignored_columns:
            print(
                "loadline select: ignoring "
                + ("column " if len(parsed.ignored_columns) == 1 else "columns ")
                + ", ".join(parsed.ignored_columns),
                file=sys.stderr,
            )
        problem = Problem(parsed.items, capacity=args.capacity, resolution=args.resolution)
        curve_to = args.curve_to
        if curve_to is None and args.curve:
            curve_to = default_curve_to(args.capacity)
        selection = solve(problem, curve_to=curve_to, explain=args.explain)
    except SelectorInputError as error:
        message = error.message
        if error.row is None and error.key in rows:
            message = f"row {rows[error.key]}: {message}"
        print(f"loadline select: {message}", file=sys.stderr)
        return EXIT_BAD_INPUT
    if args.json:
        json.dump(selection_to_dict(selection), sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        _print_table(problem, selection, sys.stdout)
    return EXIT_OK if selection.feasible else EXIT_INFEASIBLE


def _print_table(problem: Problem, selection: Selection, out: TextIO) -> None:
    chosen = set(selection.chosen)
    width = max([3, *(len(item.key) for item in problem.items)])
    out.write(f"{'in':<3} {'key':<{width}} {'effort':>8} {'value':>10}\n")
    for item in problem.items:
        mark = "*" if item.key in chosen else ""
        out.write(
            f"{mark:<3} {item.key:<{width}} {format_days(item.effort):>8} {item.value:>10g}\n"
        )
    out.write(
        f"\nChosen {len(selection.chosen)} of {len(problem.items)}: value {selection.value:g}, "
        f"effort {format_days(selection.effort)} of {format_days(selection.capacity)} days, "
        f"headroom {format_days(selection.headroom)} days\n"
    )
    if selection.infeasibility:
        out.write(f"Infeasible: {selection.infeasibility}\n")
    out.write(f"Method: {selection.method} ({selection.method_note})\n")
    rounded = selection.rounding.items_rounded_up
    if rounded or selection.rounding.capacity_days_lost:
        out.write(
            f"Rounding: {len(rounded)} effort{'' if len(rounded) == 1 else 's'} rounded up to the "
            f"{format_days(selection.rounding.resolution)}-day resolution; "
            f"{format_days(selection.rounding.capacity_days_lost)} days of capacity unused\n"
        )
    if selection.curve is not None:
        out.write("\nCapacity curve (days -> best value, where it changes):\n")
        last = None
        for days, value in zip(selection.curve.capacity_days, selection.curve.values, strict=True):
            if value != last:
                out.write(f"  {format_days(days):>8} -> {value:g}\n")
                last = value
    if selection.explanations is not None:
        out.write("\nWhy:\n")
        for explanation in selection.explanations:
            out.write(f"  {explanation.key}: {explanation.reason}\n")
