"""Lost-update protection on the JSON API: ETag and If-Match (RFC 9110, sections 8.8.3, 13.1.1).

Rows without a version column (teams, members, days-off rows, periods, scenarios and a team's
capacity settings in a period) answer a single-row GET and every successful write with an
`ETag`: the row's fingerprint (`store._common.fingerprint`, the digest the pages send back as
`based_on`) as a strong entity tag. A write may send it back in `If-Match`; the store then
refuses the write when the row has changed since (`refuse_if_changed`), and `if_match` turns
that refusal into 412 Precondition Failed, naming the stored values and carrying their ETag.
No If-Match, or `If-Match: *`, writes without a condition, as before; on the days-off upsert
`If-Match: *` also means "only if a row is stored" (412 when none is).

An upsert (the days-off POST) also reads `If-None-Match: *` (RFC 9110, section 13.1.2): write
only when no row is stored yet, so two people entering the same member's days at once cannot
silently replace each other's; a stored row makes it 412.

A single-row GET whose ETag covers its whole answer (team, member, days-off row, period) reads
If-None-Match too: when it names the current tag (weak comparison, RFC 9110 section 8.8.3.2)
or is `*`, the answer is 304 Not Modified with the ETag and no body. Answers computed from
more than the tagged row (capacity, a solved scenario) never answer 304.
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Annotated, Any, Protocol, TypeVar

from fastapi import Depends, Header, Request, Response
from pydantic import BaseModel
from sqlmodel import SQLModel

from server.errors import AlreadyStoredError, LoadlineError, NothingStoredError, StaleVersionError
from server.routes.responses import ErrorBody, ErrorDetail
from server.store._common import fingerprint

HEADER = "If-Match"
NONE_MATCH_HEADER = "If-None-Match"
_ENTITY_TAG = re.compile(r'(W/)?"([\x21\x23-\x7e\x80-\xff]*)"')
_SHOWN_CHARS = 60

IF_MATCH_HELP = (
    "The ETag you read (quotes included), so the write is refused with 412 if someone "
    "changed the row since. Several tags may be listed, comma-separated; `*` or no header "
    "writes without a condition (the last write wins). Clients should send it."
)
IF_NONE_MATCH_HELP = (
    "`*` to create the row only when none is stored yet (412 with the stored values "
    "otherwise). Entity tags are not accepted here."
)
IF_NONE_MATCH_READ_HELP = (
    "The ETag of the copy you hold (quotes included; W/ allowed), or `*`: when it is still "
    "current the answer is 304 Not Modified with no body."
)
ETAG_HELP = "The row's entity tag: a fingerprint of its stored values. Send it back in If-Match."


class _Tagged(Protocol):
    etag: str


TaggedT = TypeVar("TaggedT", bound=_Tagged)
PublicT = TypeVar("PublicT", bound=BaseModel)


def entity_tag(row_fingerprint: str) -> str:
    """A store fingerprint as a strong entity tag, as the ETag header and `etag` fields show."""
    return f'"{row_fingerprint}"'


def tagged_public(model: type[PublicT], row: SQLModel, row_fingerprint: str) -> PublicT:
    """The row's public shape with its `etag`."""
    return model.model_validate({**row.model_dump(), "etag": entity_tag(row_fingerprint)})


class BadIfMatchError(LoadlineError):
    """An If-Match or If-None-Match header cannot be read."""

    status_code = 400

    def __init__(self, value: str, problem: str, header: str = HEADER) -> None:
        shown = value if len(value) <= _SHOWN_CHARS else f"{value[:_SHOWN_CHARS]}…"
        super().__init__(
            f"{header}: {problem}; expected * or entity tags in double quotes as the ETag "
            f'header sends them, such as "0123456789abcdef", got {shown!r}.',
            field=header,
        )


class NotModified(Exception):  # noqa: N818 - a 304 answer, not an error
    """The client's copy is current: answer 304 with this ETag and no body."""

    def __init__(self, etag: str) -> None:
        super().__init__(etag)
        self.etag = etag


class PreconditionFailedError(StaleVersionError):
    """If-Match names values that are no longer stored (412); carries the stored ones."""

    status_code = 412

    def __init__(self, message: str, *, current: dict[str, Any], header: str = HEADER) -> None:
        super().__init__(message, current=current)
        self.field = header

    def headers(self) -> dict[str, str]:
        return {"ETag": entity_tag(fingerprint(self.current))}


def _entity_tags(text: str, header: str) -> list[tuple[bool, str]]:
    """Each (weak, opaque tag) of a comma-separated list of entity tags; * is handled before."""
    tags: list[tuple[bool, str]] = []
    pos = 0
    while pos < len(text):
        if text[pos] in " \t,":
            pos += 1
            continue
        found = _ENTITY_TAG.match(text, pos)
        if found is None:
            problem = "* must stand alone" if text[pos] == "*" else "not an entity tag"
            raise BadIfMatchError(text, problem, header)
        tags.append((bool(found.group(1)), found.group(2)))
        pos = found.end()
        rest = text[pos:].lstrip(" \t")
        if rest and not rest.startswith(","):
            raise BadIfMatchError(text, "entity tags must be separated by commas", header)
    if not tags:
        raise BadIfMatchError(text, "no entity tag", header)
    return tags


def parse_if_match(values: list[str]) -> tuple[frozenset[str] | None, bool]:
    """The strong tags an If-Match asks for (None: no condition) and whether it held weak ones.

    Weak tags (W/"...") are valid but never match a write: If-Match compares strongly.
    """
    if not values:
        return None, False
    text = ", ".join(values)
    if text.strip(" \t") == "*":
        return None, False
    tags = _entity_tags(text, HEADER)
    strong = frozenset(tag for weak, tag in tags if not weak)
    return strong, len(strong) < len(tags)


@dataclass(frozen=True)
class NoneMatch:
    """What an If-None-Match names: any current copy (*), or these opaque tags."""

    any_copy: bool
    tags: frozenset[str]

    def holds(self, etag: str) -> bool:
        """Whether the copy tagged `etag` (quoted, as sent) is named. Weak comparison: W/"x"
        and "x" name the same copy (a proxy that compresses may weaken the tag it passes on)."""
        return self.any_copy or etag.removeprefix("W/").strip('"') in self.tags


def parse_if_none_match(values: list[str]) -> NoneMatch | None:
    """The If-None-Match of a request (None: no header); a malformed one is BadIfMatchError."""
    if not values:
        return None
    text = ", ".join(values)
    if text.strip(" \t") == "*":
        return NoneMatch(any_copy=True, tags=frozenset())
    tags = frozenset(tag for _, tag in _entity_tags(text, NONE_MATCH_HEADER))
    return NoneMatch(any_copy=False, tags=tags)


class ETagged:
    """Sets the ETag header of a successful answer from the row it answers with."""

    def __init__(self, response: Response) -> None:
        self._response = response

    def __call__(self, body: TaggedT) -> TaggedT:
        self._response.headers["ETag"] = body.etag
        return body


class Precondition(ETagged):
    """A write's If-Match: `based_on` goes to the store (None: no condition); `any_stored`
    (If-Match: *) lets an upsert replace a stored row but not create one."""

    def __init__(
        self,
        response: Response,
        based_on: frozenset[str] | None,
        weak: bool,
        *,
        any_stored: bool = False,
    ) -> None:
        super().__init__(response)
        self.based_on = based_on
        self.weak = weak
        self.any_stored = any_stored


class NoStoredRowError(LoadlineError):
    """If-Match: * on an upsert with no row stored (412, RFC 9110 section 13.1.1)."""

    status_code = 412


class ConditionalRead(ETagged):
    """A single-row GET: tagged as usual, 304 when If-None-Match holds the current tag."""

    def __init__(self, response: Response, if_none_match: NoneMatch | None) -> None:
        super().__init__(response)
        self._if_none_match = if_none_match

    def __call__(self, body: TaggedT) -> TaggedT:
        if self._if_none_match is not None and self._if_none_match.holds(body.etag):
            raise NotModified(body.etag)
        return super().__call__(body)


def etagged(response: Response) -> ETagged:
    return ETagged(response)


def conditional_read(
    request: Request,
    response: Response,
    if_none_match_header: Annotated[
        str | None, Header(alias=NONE_MATCH_HEADER, description=IF_NONE_MATCH_READ_HELP)
    ] = None,
) -> ConditionalRead:
    # Read before any work, so a malformed header is refused (400) before the row is read.
    return ConditionalRead(
        response, parse_if_none_match(request.headers.getlist(NONE_MATCH_HEADER))
    )


def if_match(
    request: Request,
    response: Response,
    if_match_header: Annotated[str | None, Header(alias=HEADER, description=IF_MATCH_HELP)] = None,
) -> Iterator[Precondition]:
    """The If-Match of a write; the store's refusal of a stale one becomes 412."""
    values = request.headers.getlist(HEADER)
    based_on, weak = parse_if_match(values)
    any_stored = bool(values) and based_on is None  # a header naming no tag: "*"
    precondition = Precondition(response, based_on, weak, any_stored=any_stored)
    try:
        yield precondition
    except NothingStoredError as exc:
        message = (
            f"{exc.found} Nothing was saved: {HEADER}: * writes only over a stored row. "
            f"Leave {HEADER} out, or send {NONE_MATCH_HEADER}: *, to record them."
        )
        raise NoStoredRowError(message, field=HEADER) from exc
    except StaleVersionError as exc:
        if based_on is None or exc.changed is None:
            raise
        if weak and not based_on:  # nothing may have changed: say what was wrong instead
            message = (
                f'{HEADER} held only weak entity tags (W/"..."), which never match a write. '
                "Nothing was saved; send the ETag exactly as the answer gave it, without W/."
            )
        else:
            message = (
                f"{exc.changed} Nothing was saved: {HEADER} names the values as they were "
                f"before that change. Read them again and send the new ETag in {HEADER} to "
                "apply your change over it."
            )
        raise PreconditionFailedError(message, current=exc.current) from exc


def create_only(
    request: Request,
    if_none_match_header: Annotated[
        str | None, Header(alias=NONE_MATCH_HEADER, description=IF_NONE_MATCH_HELP)
    ] = None,
) -> Iterator[bool]:
    """Whether an upsert may only create (If-None-Match: *); a stored row becomes 412."""
    values = request.headers.getlist(NONE_MATCH_HEADER)
    text = ", ".join(values).strip(" \t")
    if values and text != "*":
        shown = text if len(text) <= _SHOWN_CHARS else f"{text[:_SHOWN_CHARS]}…"
        raise LoadlineError(
            f"{NONE_MATCH_HEADER}: only * is understood on this write (create the row only "
            f"when none is stored), got {shown!r}. To replace a row as you read it, send its "
            f"ETag in {HEADER} instead.",
            field=NONE_MATCH_HEADER,
        )
    try:
        yield bool(values)
    except AlreadyStoredError as exc:
        message = (
            f"{exc.found} Nothing was saved: {NONE_MATCH_HEADER}: * writes only when there is "
            f"none. Read the stored row and send its ETag in {HEADER} to replace it."
        )
        raise PreconditionFailedError(
            message, current=exc.current, header=NONE_MATCH_HEADER
        ) from exc


ETagDep = Annotated[ETagged, Depends(etagged)]
ConditionalReadDep = Annotated[ConditionalRead, Depends(conditional_read)]
CreateOnlyDep = Annotated[bool, Depends(create_only)]
IfMatchDep = Annotated[Precondition, Depends(if_match)]


class BadRequestBody(BaseModel):
    """A malformed If-Match (a message naming the header), or a body that cannot be read."""

    detail: ErrorDetail | str


_ETAG_HEADER = {"ETag": {"description": ETAG_HELP, "schema": {"type": "string"}}}
_PRECONDITION_ERRORS: dict[int | str, dict[str, Any]] = {
    400: {
        "model": BadRequestBody,
        "description": f"The {HEADER} header is malformed (detail.field is {HEADER}), or the "
        "body could not be read.",
    },
    412: {
        "model": ErrorBody,
        "description": f"Precondition Failed: the row changed since the ETag sent in {HEADER}. "
        "Nothing was stored; detail.current holds the stored values and the ETag header their "
        "tag.",
    },
}

TAGGED: dict[int | str, dict[str, Any]] = {200: {"headers": _ETAG_HEADER}}
TAGGED_READ: dict[int | str, dict[str, Any]] = {
    **TAGGED,
    304: {
        "description": f"Not Modified: the {NONE_MATCH_HEADER} sent holds the current ETag "
        "(or is *). No body; the ETag header repeats the tag.",
        "headers": _ETAG_HEADER,
    },
    400: {
        "model": BadRequestBody,
        "description": f"The {NONE_MATCH_HEADER} header is malformed "
        f"(detail.field is {NONE_MATCH_HEADER}).",
    },
}
TAGGED_CREATED: dict[int | str, dict[str, Any]] = {201: {"headers": _ETAG_HEADER}}
CONDITIONAL: dict[int | str, dict[str, Any]] = {**TAGGED, **_PRECONDITION_ERRORS}
CONDITIONAL_DELETE: dict[int | str, dict[str, Any]] = dict(_PRECONDITION_ERRORS)
# The days-off upsert reads both headers: If-Match to replace a row as read, If-None-Match: *
# to write only a new one.
CONDITIONAL_UPSERT: dict[int | str, dict[str, Any]] = {
    **TAGGED_CREATED,
    400: {
        "model": BadRequestBody,
        "description": f"The {HEADER} or {NONE_MATCH_HEADER} header is malformed (detail.field "
        "names it), or the body could not be read.",
    },
    412: {
        "model": ErrorBody,
        "description": f"Precondition Failed: the row changed since the ETag sent in {HEADER}, "
        f"or {NONE_MATCH_HEADER}: * was sent and a row is stored (detail.current holds the "
        f"stored values and the ETag header their tag), or {HEADER}: * was sent and no row is "
        "stored. Nothing was stored.",
    },
}
