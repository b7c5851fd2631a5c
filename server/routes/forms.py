"""Posted HTML forms: fields read as text, percentages, re-showing a refused form, and the
redirect that follows a successful post. Shared by the page routes."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from fastapi import Request
from fastapi.responses import RedirectResponse, Response

from server.actor import current_actor
from server.deps import TemplatesDep
from server.errors import LoadlineError, StaleVersionError

# Refusals of a share typed as a percentage (member share, confidence) and of the spread.
SHARE_RULE = "Enter a percentage above 0 and at most 100."
SPREAD_RULE = "Enter a percentage from 0 to below 100."


def form_text(form: Any, name: str, *, strip: bool = True) -> str:
    """The field as text ("" when missing or a file); strip=False keeps passwords and notes."""
    value = form.get(name, "")
    if not isinstance(value, str):
        return ""
    return value.strip() if strip else value


def optional_text(form: Any, name: str) -> str | None:
    """The field as text, or None when it is blank."""
    return form_text(form, name) or None


def optional_int(value: str) -> int | None:
    """A whole number typed as digits, else None (a blank or hand-edited field)."""
    return int(value) if value.isdigit() else None


def based_on(form: Any) -> str | None:
    """The fingerprint of the stored values the form was built from (None: none sent)."""
    return form_text(form, "based_on") or None


def render(
    templates: TemplatesDep,
    request: Request,
    name: str,
    context: dict[str, Any],
    status_code: int = 200,
) -> Response:
    return templates.TemplateResponse(request, name, context, status_code=status_code)


def store_or_errors(action: Any) -> tuple[Any, dict[str, str]]:
    """Run a persistence call; a refused change becomes a message beside its field.

    A save on top of a colleague's change keeps only the sentence saying what changed
    (`StaleVersionError.changed`): `merge_after_conflict` adds what the form did about it.
    """
    try:
        return action(), {}
    except StaleVersionError as exc:
        return None, {"version": exc.changed or exc.message}
    except LoadlineError as exc:
        return None, {exc.field or "form": exc.message}


def refusal_status(errors: dict[str, str]) -> int:
    """409 when the form was refused for a colleague's change in between, else 422."""
    return 409 if "version" in errors else 422


def percent_to_share(raw: str | None) -> Any:
    """A percentage typed on a page ("80", "80 %") as the share the API takes (0.8).

    Text that is not a number passes through, so the schema refuses it with its own message.
    """
    if raw is None:
        return None
    try:
        return float(raw.rstrip("% ")) / 100
    except ValueError:
        return raw


def refused_as_percentage(
    errors: dict[str, str], field: str, page_field: str, rule: str
) -> dict[str, str]:
    """Move a refused share to the page's percentage field, phrased as a percentage.

    The schema checks a share (0.8); the page asks for a percentage (80), so a range message
    of the schema would name the wrong numbers: the page's rule is said instead.
    """
    if field in errors:
        del errors[field]
        errors[page_field] = rule
    return errors


def see_other(url: str) -> RedirectResponse:
    """303 after a post, so reloading the page that follows does not post again."""
    return RedirectResponse(url, status_code=303)


# --- saving again after a colleague's change ---------------------------------------------

# A form names the stored values it showed in hidden `shown_<field>` fields (the `shown`
# macro of _forms.html); several values of one field (ticked boxes) are joined by commas.
SHOWN_PREFIX = "shown_"


@dataclass(frozen=True)
class BothChanged:
    """A field this form and a colleague both changed: the typed value is kept."""

    label: str
    yours: str
    stored: str


@dataclass(frozen=True)
class Merged:
    """A refused form made ready to save again: the fields this form changed as typed, every
    other field as stored now."""

    values: dict[str, Any]
    kept: tuple[str, ...]  # labels of the fields this form changed, kept as typed
    refreshed: tuple[str, ...]  # labels of the untouched fields the colleague changed
    both: tuple[BothChanged, ...]

    def note(self, who: str = "") -> str:
        """What the form did with the stored values, in a few short sentences."""
        colleague = who or "someone else"
        yourself = bool(who) and who == current_actor.get()
        parts = []
        if self.kept:
            parts.append(f"Kept as you typed: {', '.join(self.kept)}.")
        if self.refreshed:
            parts.append(f"Refreshed to the stored value: {', '.join(self.refreshed)}.")
        for field in self.both:
            yours, stored = field.yours or "(empty)", field.stored or "(empty)"
            if yourself:  # the same account, in another tab or window
                parts.append(
                    f"You changed {field.label} in another window too: here {yours}, "
                    f"stored {stored}; this one is kept."
                )
            else:
                parts.append(
                    f"You and {colleague} both changed {field.label}: yours {yours}, "
                    f"stored {stored}; yours is kept."
                )
        return " ".join(parts)


def _canonical(value: Any) -> Any:
    if isinstance(value, (list, tuple)):
        return sorted(str(v).strip() for v in value if str(v).strip())
    text = str(value).replace("\r\n", "\n").strip()
    try:
        return float(text)
    except ValueError:
        return text


def _same(a: Any, b: Any) -> bool:
    return _canonical(a) == _canonical(b)


def _in_words(value: Any) -> str:
    return ", ".join(value) if isinstance(value, (list, tuple)) else str(value).strip()


def _posted_shown(form: Any, name: str, like: Any) -> Any:
    """The `shown_<name>` value a form sent (a list when `like` is one), None when absent."""
    raw = form.get(SHOWN_PREFIX + name) if hasattr(form, "get") else None
    if not isinstance(raw, str):
        return None
    return [p for p in raw.split(",") if p] if isinstance(like, list) else raw


def shown_as_posted(form: Any, stored: Mapping[str, Any]) -> dict[str, Any]:
    """What a refused form showed when it was opened, to show it again based on the same.

    A form re-shown for a typing mistake keeps its version or fingerprint as sent, so its
    `shown_<field>` values stay too; a field whose value was not sent takes the stored one.
    """
    posted = {name: _posted_shown(form, name, now) for name, now in stored.items()}
    return {name: now if posted[name] is None else posted[name] for name, now in stored.items()}


def basis_to_show(
    form: Any, errors: Mapping[str, str], based_on_now: str, shown_now: Mapping[str, Any]
) -> tuple[str, dict[str, Any]]:
    """The fingerprint and `shown_<field>` values to show a refused form with.

    Refused as typed, it stays based on what it showed when opened: were it based on the
    values stored now, a colleague's change made meanwhile would be overwritten without a
    word by the typed copy of the old value. Refused for that change, it is based on the
    stored values now (the fields were merged with them).
    """
    if "version" in errors:
        return based_on_now, dict(shown_now)
    return based_on(form) or based_on_now, shown_as_posted(form, shown_now)


def merge_after_conflict(
    form: Any,
    typed: Mapping[str, Any],
    stored: Mapping[str, Any],
    labels: Mapping[str, str] | None = None,
) -> Merged:
    """The form's values to show again after a save was refused for a colleague's change.

    `stored` holds the form's fields as the form would show the stored row now; the posted
    `shown_<field>` values say what the form showed when it was opened. A field typed as it
    was shown was not touched here, so it takes the stored value (the colleague's change
    comes in); a field typed differently keeps the typed value, and when the stored value
    moved too, both changed it and it is named. A field whose shown value was not sent
    (a page opened before this rule) keeps what was typed, as before.
    """
    labels = labels or {}
    values = dict(typed)
    kept: list[str] = []
    refreshed: list[str] = []
    both: list[BothChanged] = []
    for name, now in stored.items():
        label = labels.get(name) or name.replace("_", " ").replace(".", " ")
        shown = _posted_shown(form, name, now)
        mine = typed.get(name, [] if isinstance(now, list) else "")
        if shown is None:
            continue
        if _same(mine, shown):
            values[name] = now
            if not _same(now, shown):
                refreshed.append(label)
            continue
        kept.append(label)
        if not _same(now, shown) and not _same(now, mine):
            both.append(BothChanged(label, _in_words(mine), _in_words(now)))
    return Merged(values, tuple(kept), tuple(refreshed), tuple(both))


def after_conflict(
    form: Any,
    errors: dict[str, str],
    typed: Mapping[str, Any],
    stored: Mapping[str, Any],
    *,
    labels: Mapping[str, str] | None = None,
    who: str = "",
) -> tuple[dict[str, Any], dict[str, str]]:
    """The values and errors to show a refused form with.

    Refused for a colleague's change in between (`errors["version"]`): the values merged
    with the stored ones (`merge_after_conflict`) and the message saying what was kept and
    what was refreshed. Refused for anything else: unchanged.
    """
    if "version" not in errors:
        return dict(typed), errors
    merged = merge_after_conflict(form, typed, stored, labels)
    message = " ".join(
        part
        for part in (
            errors["version"],
            "Nothing was saved.",
            merged.note(who),
            "Save again to store the form as it is now.",
        )
        if part
    )
    return merged.values, errors | {"version": message}
