"""The name of whoever makes the current request, for the audit trail.

Set by the access layer per request; a context variable, so concurrent requests (threads or
tasks, any number of worker processes) never see each other's value.
"""

from __future__ import annotations

from contextvars import ContextVar

current_actor: ContextVar[str] = ContextVar("current_actor", default="")

# Actors of changes no person made: the demo loader writes its workspace under this name, so
# the trail says where the demo came from and undo never offers to take it apart.
DEMO_ACTOR = "demo"
SYSTEM_ACTORS = frozenset({DEMO_ACTOR})
