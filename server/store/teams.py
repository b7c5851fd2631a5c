"""Teams, members and their availability."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm.exc import StaleDataError
from sqlmodel import Session, col, delete, func, select

from server.errors import AlreadyStoredError, ConflictError, InputError, NothingStoredError
from server.models import (
    Availability,
    CapacitySettings,
    EffortLine,
    Initiative,
    Member,
    Period,
    Scenario,
    Team,
)
from server.schemas import (
    AvailabilityCreate,
    AvailabilityUpdate,
    MemberCreate,
    MemberUpdate,
    TeamCreate,
    TeamUpdate,
)
from server.store import audit
from server.store._common import (
    BasedOn,
    and_list,
    commit_or_conflict,
    fingerprint,
    first_named,
    flush_or_conflict,
    get_or_404,
    refuse_if_changed,
    same_name,
)
from server.store.initiatives import (
    changed_while_deleting,
    delete_needs_among,
    needs_from_outside,
)
from server.store.periods import period_working_days
from server.wording import counted, in_days, possessive, quoted


def list_teams(session: Session) -> list[Team]:
    return list(session.exec(select(Team).order_by(func.lower(Team.name))))


def get_team(session: Session, *, team_id: int) -> Team:
    return get_or_404(session, Team, team_id, "team")


def _check_name_free(session: Session, name: str, team_id: int | None = None) -> None:
    clash = same_name(session.exec(select(Team)), name, team_id)
    if clash is not None:
        raise ConflictError(f"A team named “{clash.name}” already exists.", field="name")


def _team_values(db_team: Team) -> dict[str, Any]:
    return {"name": db_team.name, "default_spread": db_team.default_spread}


def team_fingerprint(db_team: Team) -> str:
    """What the team settings form sends back as `based_on`."""
    return fingerprint(_team_values(db_team))


def _refuse_if_team_changed(db_team: Team, based_on: BasedOn) -> None:
    refuse_if_changed(
        based_on,
        _team_values(db_team),
        "The team's name and spread were",
        f"“{db_team.name}”, spread {db_team.default_spread * 100:g} %",
    )


def create_team(session: Session, *, team_in: TeamCreate, actor: str = "") -> Team:
    _check_name_free(session, team_in.name)
    db_team = Team(name=team_in.name, default_spread=team_in.default_spread)
    session.add(db_team)
    message = f"A team named “{team_in.name}” already exists."
    flush_or_conflict(session, message, "name")
    audit.record(
        session,
        actor=actor,
        action="team.create",
        entity="team",
        entity_id=db_team.id,
        team_id=db_team.id,
        summary=f"Added team “{db_team.name}”",
        after=_team_values(db_team),
    )
    commit_or_conflict(session, message, "name")
    session.refresh(db_team)
    return db_team


def update_team(
    session: Session,
    *,
    team_id: int,
    team_in: TeamUpdate,
    actor: str = "",
    based_on: BasedOn = None,
) -> Team:
    """Rename the team or set its spread; `based_on`: see `refuse_if_changed`."""
    db_team = get_team(session, team_id=team_id)
    _refuse_if_team_changed(db_team, based_on)
    changes = team_in.model_dump(exclude_unset=True, exclude_none=True)
    if "name" in changes:
        _check_name_free(session, changes["name"], team_id)
    old_name = db_team.name
    before = _team_values(db_team)
    for key, value in changes.items():
        setattr(db_team, key, value)
    old, new = audit.changed(before, _team_values(db_team))
    if new:  # a form sent back unchanged is no change worth an entry
        renamed = f"Renamed team “{old_name}” to “{db_team.name}”"
        others = [name for name in new if name != "name"]
        if "name" in new and others:  # every changed field named, not the rename alone
            renamed += f" and changed its {_fields(dict.fromkeys(others))}"
        audit.record(
            session,
            actor=actor,
            action="team.update",
            entity="team",
            entity_id=team_id,
            team_id=team_id,
            summary=renamed if "name" in new else f"Changed {_fields(new)} of team “{old_name}”",
            before=old,
            after=new,
        )
    session.add(db_team)
    commit_or_conflict(session, "A team with that name already exists.", "name")
    session.refresh(db_team)
    return db_team


def _fields(values: dict[str, Any]) -> str:
    return ", ".join(name.replace("_", " ") for name in values)


def count_team_initiatives(session: Session, *, team_id: int) -> int:
    query = select(func.count()).select_from(Initiative).where(Initiative.team_id == team_id)
    return int(session.exec(query).one())


def count_team_scenarios(session: Session, *, team_id: int) -> int:
    query = select(func.count()).select_from(Scenario).where(Scenario.team_id == team_id)
    return int(session.exec(query).one())


def team_delete_refusal(
    session: Session, db_team: Team, owned: list[Initiative], *, with_initiatives: bool
) -> ConflictError | None:
    """Why the team cannot be deleted (its initiatives `owned` with it or not), or None."""
    if owned and not with_initiatives:
        return ConflictError(
            f"Team “{db_team.name}” still has {counted(len(owned), 'initiative')}; delete "
            f"{'it' if len(owned) == 1 else 'them'} first or ask to delete "
            f"{'it' if len(owned) == 1 else 'them'} with the team.",
            field="team_id",
        )
    held = needs_from_outside(session, owned) + _effort_held_by_others(session, db_team)
    if held:
        return ConflictError(
            f"Team “{db_team.name}” cannot be deleted: {'; '.join(held)}. Change those "
            "initiatives first: remove the need, or the team's effort, on their edit pages.",
            field="team_id",
        )
    return None


def _refuse_team_delete(
    session: Session, db_team: Team, owned: list[Initiative], *, with_initiatives: bool
) -> None:
    """The check before deleting: raise `team_delete_refusal`'s refusal, if any."""
    refusal = team_delete_refusal(session, db_team, owned, with_initiatives=with_initiatives)
    if refusal is not None:
        raise refusal


def _owned(session: Session, team_id: int) -> list[Initiative]:
    return list(session.exec(select(Initiative).where(Initiative.team_id == team_id)))


@dataclass(frozen=True)
class _Belongings:
    """The rows that go with a team: its members and their days-off rows, its capacity
    settings and its scenarios (the store deletes them; their foreign keys are RESTRICT)."""

    members: list[Member]
    availability: list[Availability]
    settings: list[CapacitySettings]
    scenarios: list[Scenario]

    def delete(self, session: Session) -> None:
        """Delete exactly the rows listed, those that refer to others first (days off to
        members, members to the team): a row added since stays, and holds its key."""
        for model, rows in (
            (Availability, self.availability),
            (Member, self.members),
            (CapacitySettings, self.settings),
            (Scenario, self.scenarios),
        ):
            if rows:
                ids = [row.id for row in rows]
                session.exec(delete(model).where(col(model.id).in_(ids)))


def _belongings(session: Session, team_id: int) -> _Belongings:
    members = list_members(session, team_id=team_id)
    member_ids = [m.id for m in members]
    return _Belongings(
        members=members,
        availability=list(
            session.exec(
                select(Availability)
                .where(col(Availability.member_id).in_(member_ids))
                .order_by(Availability.member_id, Availability.period_id)
            )
        ),
        settings=list(
            session.exec(select(CapacitySettings).where(CapacitySettings.team_id == team_id))
        ),
        scenarios=list(session.exec(select(Scenario).where(Scenario.team_id == team_id))),
    )


def delete_team(
    session: Session,
    *,
    team_id: int,
    with_initiatives: bool = False,
    actor: str = "",
    based_on: BasedOn = None,
) -> None:
    """Delete a team; refuse while it owns initiatives unless asked to delete those too.

    Refused in any case while another team's initiative needs one of the team's initiatives
    or carries effort for the team: the database would drop that need or effort line from an
    initiative nobody asked to change. Its members (with their days off), capacity settings
    and scenarios go with it, each listed in the audit entry. The database refuses too (every
    foreign key to the team or a member is ON DELETE RESTRICT) when another writer makes such
    a row between the check and the commit; the refusal is then the same, or says what was
    added meanwhile. `based_on`: see `refuse_if_changed`.
    """
    db_team = get_team(session, team_id=team_id)
    _refuse_if_team_changed(db_team, based_on)
    owned = _owned(session, team_id)
    _refuse_team_delete(session, db_team, owned, with_initiatives=with_initiatives)
    belongings = _belongings(session, team_id)
    days_off: dict[int | None, list[dict[str, Any]]] = {m.id: [] for m in belongings.members}
    for row in belongings.availability:
        days_off[row.member_id].append(_availability_values(row) | {"period_id": row.period_id})
    # The entry keeps what went with the team (the initiatives' own values are in their
    # earlier entries).
    audit.record(
        session,
        actor=actor,
        action="team.delete",
        entity="team",
        entity_id=team_id,
        team_id=team_id,
        summary=f"Deleted team “{db_team.name}”"
        + _gone_with(len(owned), len(belongings.scenarios)),
        before=_team_values(db_team)
        | {
            "members": [
                {"name": m.name, "allocation": m.allocation, "availability": days_off[m.id]}
                for m in belongings.members
            ],
            "initiatives": [{"id": i.id, "title": i.title} for i in owned],
            "scenarios": [{"name": s.name, "changes": s.changes} for s in belongings.scenarios],
            "capacity_settings": [
                {
                    "period_id": row.period_id,
                    "focus_factor": row.focus_factor,
                    "reserve_pct": row.reserve_pct,
                }
                for row in belongings.settings
            ],
        },
    )
    # Only initiatives asked for go: any the team has without that, the database refuses.
    doomed = owned if with_initiatives else []
    owned_ids = [row.id or 0 for row in doomed]
    versions = {row.id or 0: row.version for row in doomed}
    try:
        delete_needs_among(session, owned_ids)
        for db_initiative in doomed:
            session.delete(db_initiative)
        session.flush()
        belongings.delete(session)
        session.delete(db_team)
        session.commit()
    except IntegrityError as exc:  # another writer made a row that needs the team
        session.rollback()
        db_team = get_team(session, team_id=team_id)
        refusal = team_delete_refusal(
            session, db_team, _owned(session, team_id), with_initiatives=with_initiatives
        )
        if refusal is None:
            added = _added_meanwhile(session, team_id, owned_ids, belongings)
            refusal = ConflictError(
                f"Team “{db_team.name}” was changed while it was being deleted: {added}. "
                "Nothing was deleted; look at the team again and delete it again if it should "
                "still go.",
                field="team_id",
            )
        raise refusal from exc
    except StaleDataError as exc:  # one of its initiatives changed or went meanwhile
        session.rollback()
        raise changed_while_deleting(session, versions) from exc


def _added_meanwhile(
    session: Session, team_id: int, owned_ids: list[int], listed: _Belongings
) -> str:
    """What the team gained since its deletion was checked, in words."""
    known = set(owned_ids)
    added = [quoted(row.title) for row in _owned(session, team_id) if row.id not in known]
    now = _belongings(session, team_id)
    members = {m.id: m.name for m in now.members}
    had = {
        "members": {m.id for m in listed.members},
        "availability": {r.id for r in listed.availability},
        "settings": {r.id for r in listed.settings},
        "scenarios": {r.id for r in listed.scenarios},
    }
    added += [f"member {m.name}" for m in now.members if m.id not in had["members"]]
    added += [
        f"days off of {members.get(r.member_id, 'a member')}"
        for r in now.availability
        if r.id not in had["availability"]
    ]
    if any(r.id not in had["settings"] for r in now.settings):
        added.append("capacity settings")
    added += [f"scenario {quoted(r.name)}" for r in now.scenarios if r.id not in had["scenarios"]]
    if not added:
        return "someone else changed its initiatives or members"
    named = and_list(first_named(added))
    return f"{named} {'was' if len(added) == 1 else 'were'} added to it"


def _gone_with(initiatives: int, scenarios: int) -> str:
    """ " with its 3 initiatives and 1 scenario": what a team's deletion took along."""
    pairs = ((initiatives, "initiative"), (scenarios, "scenario"))
    kept = [counted(n, noun) for n, noun in pairs if n]
    return f" with its {and_list(kept)}" if kept else ""


def _effort_held_by_others(session: Session, db_team: Team) -> list[str]:
    """A clause naming other teams' initiatives that carry effort for `db_team`, if any."""
    query = (
        select(Initiative, Team.name)
        .join(EffortLine, col(EffortLine.initiative_id) == Initiative.id)
        .join(Team, col(Team.id) == Initiative.team_id)
        .where(EffortLine.team_id == db_team.id, Initiative.team_id != db_team.id)
        .order_by(func.lower(Team.name), col(Initiative.position), col(Initiative.id))
    )
    carriers = [f"“{row.title}” (team {owner})" for row, owner in session.exec(query)]
    if not carriers:
        return []
    verb = "carries" if len(carriers) == 1 else "carry"
    return [f"{and_list(first_named(carriers))} {verb} effort for team “{db_team.name}”"]


def list_members(session: Session, *, team_id: int | None = None) -> list[Member]:
    query = select(Member).order_by(Member.team_id, func.lower(Member.name), Member.id)
    if team_id is not None:
        query = query.where(Member.team_id == team_id)
    return list(session.exec(query))


def get_member(session: Session, *, member_id: int) -> Member:
    return get_or_404(session, Member, member_id, "member")


def _check_member_name_free(
    session: Session, team_id: int, name: str, member_id: int | None
) -> None:
    clash = same_name(
        session.exec(select(Member).where(Member.team_id == team_id)), name, member_id
    )
    if clash is not None:
        raise ConflictError(f"This team already has a member named “{clash.name}”.", field="name")


def _member_values(db_member: Member) -> dict[str, Any]:
    return {"name": db_member.name, "allocation": db_member.allocation}


def member_fingerprint(db_member: Member) -> str:
    """What a member's form sends back as `based_on`."""
    return fingerprint(_member_values(db_member))


def _share(allocation: float | None) -> str:
    return "the member's usual share" if allocation is None else f"share {allocation * 100:g} %"


def _refuse_if_member_changed(db_member: Member, based_on: BasedOn) -> None:
    refuse_if_changed(
        based_on,
        _member_values(db_member),
        f"{possessive(db_member.name)} name and share were",
        f"{db_member.name}, {_share(db_member.allocation)}",
    )


def create_member(session: Session, *, member_in: MemberCreate, actor: str = "") -> Member:
    db_team = get_team(session, team_id=member_in.team_id)
    _check_member_name_free(session, member_in.team_id, member_in.name, None)
    db_member = Member(**member_in.model_dump())
    session.add(db_member)
    message = "This team already has a member with that name."

    def team_still_there(again: Session) -> None:
        get_team(again, team_id=member_in.team_id)

    flush_or_conflict(session, message, "name", team_still_there)
    audit.record(
        session,
        actor=actor,
        action="member.create",
        entity="member",
        entity_id=db_member.id,
        team_id=db_member.team_id,
        summary=f"Added member “{db_member.name}” to team “{db_team.name}” "
        f"({_share(db_member.allocation)})",
        after=_member_values(db_member),
    )
    commit_or_conflict(session, message, "name", team_still_there)
    session.refresh(db_member)
    return db_member


def update_member(
    session: Session,
    *,
    member_id: int,
    member_in: MemberUpdate,
    actor: str = "",
    based_on: BasedOn = None,
) -> Member:
    """Rename a member or change their share; `based_on`: see `refuse_if_changed`."""
    db_member = get_member(session, member_id=member_id)
    _refuse_if_member_changed(db_member, based_on)
    changes = member_in.model_dump(exclude_unset=True, exclude_none=True)
    if "name" in changes:
        _check_member_name_free(session, db_member.team_id, changes["name"], member_id)
    old_name = db_member.name
    before = _member_values(db_member)
    for key, value in changes.items():
        setattr(db_member, key, value)
    old, new = audit.changed(before, _member_values(db_member))
    if new:
        team_name = get_team(session, team_id=db_member.team_id).name
        parts = []
        if "name" in new:
            parts.append(f"renamed to “{db_member.name}”")
        if "allocation" in new:
            parts.append(f"{_share(old['allocation'])} → {_share(new['allocation'])}")
        audit.record(
            session,
            actor=actor,
            action="member.update",
            entity="member",
            entity_id=member_id,
            team_id=db_member.team_id,
            summary=f"Member “{old_name}” of team “{team_name}”: {', '.join(parts)}",
            before=old,
            after=new,
        )
    session.add(db_member)
    commit_or_conflict(session, "This team already has a member with that name.", "name")
    session.refresh(db_member)
    return db_member


def _days_off_rows(session: Session, member_id: int) -> list[Availability]:
    return list(session.exec(select(Availability).where(Availability.member_id == member_id)))


def delete_member(
    session: Session, *, member_id: int, actor: str = "", based_on: BasedOn = None
) -> None:
    """Remove a member and their availability; `based_on`: see `refuse_if_changed`.

    The days-off rows go first, each listed in the entry; one recorded by another writer
    meanwhile makes the database refuse (availability.member_id is RESTRICT): nothing goes.
    """
    db_member = get_member(session, member_id=member_id)
    _refuse_if_member_changed(db_member, based_on)
    team_name = get_team(session, team_id=db_member.team_id).name
    rows = _days_off_rows(session, member_id)
    kept = [_availability_values(row) | {"period_id": row.period_id} for row in rows]
    audit.record(
        session,
        actor=actor,
        action="member.delete",
        entity="member",
        entity_id=member_id,
        team_id=db_member.team_id,
        summary=f"Removed member “{db_member.name}” from team “{team_name}”",
        before=_member_values(db_member) | {"availability": kept},
    )
    try:
        for row in rows:
            session.delete(row)
        session.flush()
        session.delete(db_member)
        session.commit()
    except IntegrityError as exc:  # days off recorded for the member since they were listed
        session.rollback()
        raise ConflictError(
            f"{possessive(db_member.name)} days off were recorded while they were being "
            "removed. Nothing was removed; look at the team again and remove them again if "
            "they should still go.",
            field="member_id",
        ) from exc


def list_availability(
    session: Session, *, team_id: int | None = None, period_id: int | None = None
) -> list[Availability]:
    query = select(Availability).order_by(Availability.period_id, Availability.member_id)
    if team_id is not None:
        query = query.join(Member, col(Member.id) == Availability.member_id).where(
            Member.team_id == team_id
        )
    if period_id is not None:
        query = query.where(Availability.period_id == period_id)
    return list(session.exec(query))


def get_availability(session: Session, *, availability_id: int) -> Availability:
    return get_or_404(session, Availability, availability_id, "availability")


def check_days_off(session: Session, *, period_id: int, days_off: float) -> None:
    """Refuse more days off than the period has working days (InputError on days_off)."""
    _check_days_off(get_or_404(session, Period, period_id, "period"), days_off)


def _check_days_off(period: Period, days_off: float) -> None:
    limit = period_working_days(period)
    if days_off > limit:
        raise InputError(
            f"days_off: {days_off:g} days off is more than the {limit} working days of "
            f"{period.name}.",
            field="days_off",
        )


def _availability_values(db_row: Availability) -> dict[str, Any]:
    # Days and share only: availability is recorded as days, never with a reason.
    return {"days_off": db_row.days_off, "allocation": db_row.allocation}


def _availability_words(values: dict[str, Any]) -> str:
    return f"{in_days(values['days_off'])} off, {_share(values['allocation'])}"


def _record_availability(
    session: Session,
    *,
    action: str,
    db_row: Availability,
    before: dict[str, Any] | None,
    after: dict[str, Any] | None,
    actor: str,
) -> None:
    """One entry naming the member, its team and the period."""
    db_member = get_member(session, member_id=db_row.member_id)
    team_name = get_team(session, team_id=db_member.team_id).name
    period_name = get_or_404(session, Period, db_row.period_id, "period").name
    where = f"“{db_member.name}” (team “{team_name}”) in “{period_name}”"
    if after is None:
        summary = f"Cleared availability of {where}"
    elif before is None:
        summary = f"Set availability of {where}: {_availability_words(after)}"
    else:
        summary = (
            f"Changed availability of {where}: {_availability_words(before)} → "
            f"{_availability_words(after)}"
        )
    audit.record(
        session,
        actor=actor,
        action=action,
        entity="availability",
        entity_id=db_row.id,
        team_id=db_member.team_id,
        summary=summary,
        before=before,
        after=after,
    )


def availability_fingerprint(db_row: Availability | None) -> str:
    """What a days-off row sends back as `based_on` (None: nothing stored for the period)."""
    return fingerprint(_availability_values(db_row) if db_row is not None else {})


def set_availability(
    session: Session,
    *,
    availability_in: AvailabilityCreate,
    actor: str = "",
    based_on: BasedOn = None,
    create_only: bool = False,
    replace_only: bool = False,
) -> Availability:
    """Create or replace a member's availability in a period (one row per member and period);
    `based_on`: see `refuse_if_changed`. create_only refuses to replace a stored row
    (AlreadyStoredError), after the based_on check; replace_only refuses to create one
    (NothingStoredError)."""
    db_member = get_member(session, member_id=availability_in.member_id)
    period = get_or_404(session, Period, availability_in.period_id, "period")
    _check_days_off(period, availability_in.days_off)
    query = select(Availability).where(
        Availability.member_id == availability_in.member_id,
        Availability.period_id == availability_in.period_id,
    )
    found = session.exec(query).first()
    before = _availability_values(found) if found is not None else None
    refuse_if_changed(
        based_on,
        before or {},
        f"{possessive(db_member.name)} days off in {period.name} were",
        _availability_words(before) if before else "none recorded",
    )
    if replace_only and before is None:
        raise NothingStoredError(
            f"{possessive(db_member.name)} days off in {period.name} are not recorded yet."
        )
    if create_only and before is not None:
        raise AlreadyStoredError(
            f"{possessive(db_member.name)} days off in {period.name} are already recorded: "
            f"{_availability_words(before)}.",
            current=before,
        )
    db_row = found or Availability(
        member_id=availability_in.member_id, period_id=availability_in.period_id
    )
    db_row.days_off = availability_in.days_off
    db_row.allocation = availability_in.allocation
    session.add(db_row)
    message = "Availability for this member and period already exists."

    def member_and_period_still_there(again: Session) -> None:
        get_member(again, member_id=availability_in.member_id)
        get_or_404(again, Period, availability_in.period_id, "period")

    flush_or_conflict(session, message, "member_id", member_and_period_still_there)
    after = _availability_values(db_row)
    if before != after:
        _record_availability(
            session,
            action="availability.set",
            db_row=db_row,
            before=before,
            after=after,
            actor=actor,
        )
    commit_or_conflict(session, message, "member_id", member_and_period_still_there)
    session.refresh(db_row)
    return db_row


def _refuse_if_availability_changed(
    session: Session, db_row: Availability, based_on: BasedOn
) -> None:
    if based_on is None:
        return  # no condition: no need to read the member and period for the message
    db_member = get_member(session, member_id=db_row.member_id)
    period = get_or_404(session, Period, db_row.period_id, "period")
    values = _availability_values(db_row)
    refuse_if_changed(
        based_on,
        values,
        f"{possessive(db_member.name)} days off in {period.name} were",
        _availability_words(values),
    )


def update_availability(
    session: Session,
    *,
    availability_id: int,
    availability_in: AvailabilityUpdate,
    actor: str = "",
    based_on: BasedOn = None,
) -> Availability:
    """Change a days-off row; `based_on`: see `refuse_if_changed`."""
    db_row = get_availability(session, availability_id=availability_id)
    _refuse_if_availability_changed(session, db_row, based_on)
    changes = availability_in.model_dump(exclude_unset=True)
    if changes.get("days_off") is not None:
        _check_days_off(
            get_or_404(session, Period, db_row.period_id, "period"), changes["days_off"]
        )
    before = _availability_values(db_row)
    for key, value in changes.items():
        if key == "days_off" and value is None:
            continue
        setattr(db_row, key, value)
    after = _availability_values(db_row)
    if before != after:
        _record_availability(
            session,
            action="availability.update",
            db_row=db_row,
            before=before,
            after=after,
            actor=actor,
        )
    session.add(db_row)
    session.commit()
    session.refresh(db_row)
    return db_row


def delete_availability(
    session: Session, *, availability_id: int, actor: str = "", based_on: BasedOn = None
) -> None:
    """Clear a days-off row; `based_on`: see `refuse_if_changed`."""
    db_row = get_availability(session, availability_id=availability_id)
    _refuse_if_availability_changed(session, db_row, based_on)
    _record_availability(
        session,
        action="availability.delete",
        db_row=db_row,
        before=_availability_values(db_row),
        after=None,
        actor=actor,
    )
    session.delete(db_row)
    session.commit()
