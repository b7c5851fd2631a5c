"""The name of whoever makes the current request, for the audit trail.

Set by the access layer per request; a context variable, so concurrent requests (threads or
tasks, any number of worker processes) never see each other's value.
"""

from __future__ import annotations

from contextvars import ContextVar

current_actor: ContextVar[str] = ContextVar("current_actor", default="")
