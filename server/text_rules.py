"""Patterns that stored text must match, shared by the schemas and their error messages."""

from __future__ import annotations

# No control characters anywhere (NUL, tab, line breaks, and the bidirectional embeddings,
# overrides and isolates, which reverse the text around a title in every sentence naming it),
# and at least one character that shows: a name of only zero-width or format characters
# would look empty on every page.
_CONTROL = "\x00-\x1f\x7f\u202a-\u202e\u2066-\u2069"
_INVISIBLE = "\\s\u200b-\u200f\u2028-\u202f\u2060-\u206f\ufeff"
VISIBLE_TEXT = f"^[^{_CONTROL}]*[^{_CONTROL}{_INVISIBLE}][^{_CONTROL}]*$"
# Working days of a week, Monday first: 1 works, 0 does not.
WEEKMASK = r"^[01]{7}$"
