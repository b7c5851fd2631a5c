"""What a change just did, said on the page a plain form post is redirected to.

The redirect carries a code ("saved-12", "deleted-12", "pasted-3", "undone-40"), not a
sentence: the sentence is read from the stored rows it names, so a link cannot make a page
say anything else. Shared by the initiative list and the live plan page.
"""

from __future__ import annotations

from sqlmodel import Session

from server.models import AuditEntry, Initiative
from server.store.initiatives import deleted_refusal
from server.wording import counted


def change_notice(session: Session, code: str | None) -> str | None:
    """ "Saved “Quay wall”." and the like for `code`; None for a code that names nothing."""
    kind, _, raw_id = (code or "").partition("-")
    if not raw_id.isdigit() or len(raw_id) > 10:
        return None
    number = int(raw_id)
    if kind in ("saved", "added"):
        row = session.get(Initiative, number)
        return f"{kind.capitalize()} “{row.title}”." if row is not None else None
    if kind == "deleted":
        gone = deleted_refusal(session, number)
        return f"Deleted “{gone.title}”." if gone is not None else None
    if kind == "pasted":
        return f"Added {counted(number, 'initiative')} from the pasted rows."
    entry = session.get(AuditEntry, number) if kind in ("undone", "redone") else None
    if entry is None:
        return None
    summary = entry.summary.removeprefix("Undid: ")
    return f"{'Undid' if kind == 'undone' else 'Redid'}: {summary}."
