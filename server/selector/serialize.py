"""JSON-ready dictionaries of selector results, shared by the CLI and the HTTP endpoint."""

from __future__ import annotations

import math
from dataclasses import asdict
from typing import Any

from .model import JointSelection, Selection

# Days and value scores carry at most six decimals; sums and differences of them pick up
# binary noise (2.141999999999996, 23.00000000000001) that nine places drop.
_DECIMALS = 9


def _clean(value: Any) -> Any:
    """Replace non-finite floats (not valid JSON) by None, round away float noise, and turn
    tuples into lists."""
    if isinstance(value, float):
        return round(value, _DECIMALS) if math.isfinite(value) else None
    if isinstance(value, dict):
        return {key: _clean(item) for key, item in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(item) for item in value]
    return value


def selection_to_dict(selection: Selection) -> dict[str, Any]:
    """Every field of a Selection as plain JSON types (curve and explanations may be None)."""
    return _clean(asdict(selection))


def joint_selection_to_dict(selection: JointSelection) -> dict[str, Any]:
    """Every field of a JointSelection as plain JSON types."""
    return _clean(asdict(selection))
