"""Scenarios, saved plans and their published links.

A saved plan is written once and never updated: a mapper event refuses any UPDATE of a
saved_plan row, so a snapshot cannot drift even through a careless caller. Plan saves,
publishes and revokes each write an audit entry in the same transaction.

Published-link tokens come from `secrets.token_urlsafe(32)`: 32 random bytes (256 bits) from
the operating system's CSPRNG, written as 43 URL-safe base64 characters.
"""

from __future__ import annotations

import secrets
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from sqlalchemy import event
from sqlmodel import Session, col, func, select

from server.actor import current_actor
from server.errors import ConflictError, InputError, NotFoundError, StaleVersionError
from server.models import (
    AuditEntry,
    Initiative,
    Period,
    Publication,
    SavedPlan,
    Scenario,
    Team,
    utcnow,
)
from server.planning.exports import ImportedPlan
from server.planning.scenarios import ScenarioChanges, changes_from_json, changes_in_words
from server.planning.snapshots import Snapshot
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
)
from server.store.initiatives import (
    add_needs,
    check_marks,
    create_initiatives,
    title_key,
    title_keys_in,
)
from server.store.periods import get_period
from server.store.teams import get_team, list_members
from server.wording import counted, days, field_label, in_days, quoted

TOKEN_BYTES = 32


@event.listens_for(SavedPlan, "before_update")
def _refuse_plan_update(_mapper: Any, _connection: Any, target: SavedPlan) -> None:
    raise ConflictError(
        f"Saved plan {target.id} is a frozen snapshot and cannot be changed; save a new plan.",
        field="plan_id",
    )


# --- scenarios -----------------------------------------------------------------------------


def list_scenarios(
    session: Session, *, team_id: int | None = None, period_id: int | None = None
) -> list[Scenario]:
    query = select(Scenario).order_by(col(Scenario.id).desc())
    if team_id is not None:
        query = query.where(Scenario.team_id == team_id)
    if period_id is not None:
        query = query.where(Scenario.period_id == period_id)
    return list(session.exec(query))


def get_scenario(session: Session, *, scenario_id: int) -> Scenario:
    return get_or_404(session, Scenario, scenario_id, "scenario")


def create_scenario(
    session: Session,
    *,
    team_id: int,
    period_id: int,
    name: str,
    changes: dict[str, Any],
    actor: str = "",
    commit: bool = True,
) -> Scenario:
    """Store a scenario; `changes` must already be checked (planning.scenarios)."""
    get_team(session, team_id=team_id)
    get_period(session, period_id=period_id)
    db_scenario = Scenario(
        name=name,
        team_id=team_id,
        period_id=period_id,
        changes=changes,
        created_by=current_actor.get() or actor,
    )
    session.add(db_scenario)
    message = "The scenario could not be stored; try again."

    def team_and_period_still_there(again: Session) -> None:
        get_team(again, team_id=team_id)
        get_period(again, period_id=period_id)

    flush_or_conflict(session, message, "team_id", team_and_period_still_there)
    audit.record(
        session,
        actor=actor,
        action="scenario.create",
        entity="scenario",
        entity_id=db_scenario.id,
        team_id=team_id,
        summary=f"Made scenario “{name}”",
        after={"name": name, "changes": changes},
    )
    if commit:
        commit_or_conflict(session, message, "team_id", team_and_period_still_there)
        session.refresh(db_scenario)
    return db_scenario


def scenario_fingerprint(db_scenario: Scenario) -> str:
    """What the scenario form sends back as `based_on`."""
    return fingerprint({"name": db_scenario.name, "changes": db_scenario.changes})


def _refuse_if_scenario_changed(db_scenario: Scenario, based_on: BasedOn) -> None:
    changed = [field_label(name) for name in db_scenario.changes]
    refuse_if_changed(
        based_on,
        {"name": db_scenario.name, "changes": db_scenario.changes},
        f"Scenario “{db_scenario.name}” was",
        f"changing {and_list(changed)}" if changed else "changing nothing",
    )


def update_scenario(
    session: Session,
    *,
    scenario_id: int,
    name: str | None = None,
    changes: dict[str, Any] | None = None,
    actor: str = "",
    based_on: BasedOn = None,
) -> Scenario:
    """Rename a scenario or replace its changes; `based_on`: see `refuse_if_changed`."""
    db_scenario = get_scenario(session, scenario_id=scenario_id)
    before = {"name": db_scenario.name, "changes": db_scenario.changes}
    _refuse_if_scenario_changed(db_scenario, based_on)
    if name is not None:
        db_scenario.name = name
    if changes is not None:
        db_scenario.changes = changes
    session.add(db_scenario)
    audit.record(
        session,
        actor=actor,
        action="scenario.update",
        entity="scenario",
        entity_id=scenario_id,
        team_id=db_scenario.team_id,
        summary=f"Changed scenario “{db_scenario.name}”",
        before=before,
        after={"name": db_scenario.name, "changes": db_scenario.changes},
    )
    session.commit()
    session.refresh(db_scenario)
    return db_scenario


def scenario_in_words(session: Session, db_scenario: Scenario) -> list[str]:
    """What a scenario changes, in words, members and initiatives named as they are now."""
    changes = changes_from_json(db_scenario.changes)
    members = {m.id or 0: m.name for m in list_members(session, team_id=db_scenario.team_id)}
    ids = [*changes.forced_in, *changes.forced_out]
    rows = session.exec(select(Initiative).where(col(Initiative.id).in_(ids))) if ids else []
    titles = {row.id or 0: row.title for row in rows}
    return changes_in_words(changes, members=members, titles=titles)


def delete_scenario(
    session: Session, *, scenario_id: int, actor: str = "", based_on: BasedOn = None
) -> None:
    """Delete a scenario; its audit entry says what it changed, to make it again by hand.

    `based_on`: see `refuse_if_changed`."""
    db_scenario = get_scenario(session, scenario_id=scenario_id)
    _refuse_if_scenario_changed(db_scenario, based_on)
    words = scenario_in_words(session, db_scenario)
    changed = "; ".join(words) if words else "nothing (it was the live plan)"
    summary = f"Deleted scenario “{db_scenario.name}”, which changed: {changed}"
    if len(summary) > 300:  # the summary's column; the whole list is in `before`
        summary = summary[:298].rstrip() + " …"
    audit.record(
        session,
        actor=actor,
        action="scenario.delete",
        entity="scenario",
        entity_id=scenario_id,
        team_id=db_scenario.team_id,
        summary=summary,
        before={"name": db_scenario.name, "changes": db_scenario.changes, "in_words": words},
    )
    session.delete(db_scenario)
    session.commit()


def deleted_scenario_name(session: Session, *, scenario_id: int, team_id: int) -> str | None:
    """The name of a scenario of this team deleted earlier, from its audit entry."""
    query = (
        select(AuditEntry)
        .where(
            AuditEntry.action == "scenario.delete",
            AuditEntry.entity_id == scenario_id,
            AuditEntry.team_id == team_id,
        )
        .order_by(col(AuditEntry.id).desc())
    )
    entry = session.exec(query).first()
    if entry is None or not entry.before or session.get(Scenario, scenario_id) is not None:
        return None
    return str(entry.before.get("name", "")) or None


# --- saved plans ---------------------------------------------------------------------------


def _figures(snapshot: Snapshot) -> str:
    result = snapshot.result
    return f"value {round(result.value, 2):g}, {days(result.effort)} of {in_days(result.capacity)}"


_LOOK_AGAIN = (
    "Nothing was saved. This page now shows the new figures: look at them, then save again "
    "to freeze them."
)


def refuse_if_not_as_shown(
    snapshot: Snapshot,
    *,
    scenario: Scenario | None = None,
    based_on: str | None = None,
    shown_digest: str | None = None,
) -> None:
    """Refuse to freeze a plan other than the one the saving page showed.

    `based_on` is the scenario's fingerprint when its page was drawn (`scenario_fingerprint`);
    `shown_digest` the inputs digest of the plan the page showed (the live plan's, or the
    scenario's solved on live data), which moves when any input of the plan does: capacity,
    days off, an initiative's estimate, value or state. None: not checked (the JSON API).
    """
    if scenario is not None and based_on is not None and based_on != scenario_fingerprint(scenario):
        changed = "; ".join(snapshot.result.changed_inputs) or "no inputs (the live plan)"
        raise StaleVersionError(
            f"Scenario “{scenario.name}” was changed since this page was shown: it now "
            f"changes {changed}, which gives {_figures(snapshot)}. {_LOOK_AGAIN}",
            current={"name": scenario.name, "changes": scenario.changes},
        )
    if shown_digest is not None and shown_digest != snapshot.digest:
        what = f"scenario “{scenario.name}”" if scenario is not None else "the live plan"
        raise StaleVersionError(
            f"The live data of {what} changed since this page was shown (capacity, days off or "
            f"initiatives): it now gives {_figures(snapshot)}. {_LOOK_AGAIN}",
            current={"inputs_digest": snapshot.digest},
        )


def save_plan(
    session: Session,
    *,
    name: str,
    snapshot: Snapshot,
    scenario_changes: dict[str, Any],
    actor: str = "",
    scenario: Scenario | None = None,
    based_on: str | None = None,
    shown_digest: str | None = None,
) -> SavedPlan:
    """Insert a frozen plan and its audit entry in one transaction.

    Refused (StaleVersionError, nothing written) when the plan is not the one the saving
    page showed: see `refuse_if_not_as_shown`.
    """
    refuse_if_not_as_shown(
        snapshot, scenario=scenario, based_on=based_on, shown_digest=shown_digest
    )
    team_ids = [t.id for t in snapshot.inputs.teams]
    db_plan = SavedPlan(
        name=name,
        period_id=snapshot.inputs.period.id,
        team_ids=team_ids,
        scenario_changes=scenario_changes,
        inputs=snapshot.inputs_json(),
        result=snapshot.result_json(),
        inputs_digest=snapshot.digest,
        created_by=current_actor.get() or actor,
    )
    session.add(db_plan)
    session.flush()
    audit.record(
        session,
        actor=actor,
        action="plan.save",
        entity="saved_plan",
        entity_id=db_plan.id,
        team_id=team_ids[0] if team_ids else None,
        summary=f"Saved plan “{name}” (value {snapshot.result.value:g})",
        after={
            "name": name,
            "inputs_digest": snapshot.digest,
            "chosen": snapshot.result.chosen,
            "scenario_changes": scenario_changes,
        },
    )
    session.commit()
    session.refresh(db_plan)  # read back as stored, so every later view sees the same values
    return db_plan


def list_plans(
    session: Session, *, team_id: int | None = None, period_id: int | None = None
) -> list[SavedPlan]:
    query = select(SavedPlan).order_by(col(SavedPlan.id).desc())
    if period_id is not None:
        query = query.where(SavedPlan.period_id == period_id)
    rows = list(session.exec(query))
    if team_id is not None:  # team_ids is a JSON list: filtered here, portably
        rows = [row for row in rows if team_id in row.team_ids]
    return rows


def get_plan(session: Session, *, plan_id: int) -> SavedPlan:
    return get_or_404(session, SavedPlan, plan_id, "plan")


def get_plans(session: Session, *, plan_ids: Sequence[int]) -> list[SavedPlan]:
    """The plans in the order asked for; unknown ids are all named in one 404."""
    found = {
        row.id: row
        for row in session.exec(select(SavedPlan).where(col(SavedPlan.id).in_(list(plan_ids))))
    }
    unknown = [i for i in plan_ids if i not in found]
    if unknown:
        listed = ", ".join(str(i) for i in unknown)
        raise NotFoundError(f"No saved plan with id {listed}.", field="plans")
    return [found[i] for i in plan_ids]


def delete_plan(session: Session, *, plan_id: int, actor: str = "") -> int:
    """Delete a saved plan and its published links (they answer 404 from then on); return
    the id of the audit entry, which keeps what the plan was (name, inputs digest, value,
    chosen), so a deleted plan is never lost without a trace."""
    db_plan = get_plan(session, plan_id=plan_id)
    links = list_publications(session, plan_id=plan_id)
    titles = {i["key"]: i["title"] for i in db_plan.inputs.get("initiatives", [])}
    trace = audit.record(
        session,
        actor=actor,
        action="plan.delete",
        entity="saved_plan",
        entity_id=plan_id,
        team_id=db_plan.team_ids[0] if db_plan.team_ids else None,
        summary=f"Deleted saved plan “{db_plan.name}”"
        + (f" and its {counted(len(links), 'published link')}" if links else ""),
        before={
            "name": db_plan.name,
            "plan_value": db_plan.result.get("value"),
            # By title, as the plan showed them: the keys name rows that may be gone too.
            "chosen": [titles.get(key, key) for key in db_plan.result.get("chosen", [])],
            "published_links": len(links),
            "inputs_digest": db_plan.inputs_digest,
        },
    )
    for link in links:
        session.delete(link)
    session.delete(db_plan)
    session.commit()
    return trace.id or 0


# --- published links -----------------------------------------------------------------------


def new_token() -> str:
    """A fresh published-link token: 256 random bits, URL-safe base64 (43 characters)."""
    return secrets.token_urlsafe(TOKEN_BYTES)


def publish_plan(session: Session, *, plan_id: int, actor: str = "") -> Publication:
    db_plan = get_plan(session, plan_id=plan_id)
    db_publication = Publication(
        plan_id=plan_id, token=new_token(), created_by=current_actor.get() or actor
    )
    session.add(db_publication)
    session.flush()
    audit.record(
        session,
        actor=actor,
        action="plan.publish",
        entity="publication",
        entity_id=db_publication.id,
        team_id=db_plan.team_ids[0] if db_plan.team_ids else None,
        summary=f"Published plan “{db_plan.name}”",
        after={"plan_id": plan_id},
    )
    session.commit()
    session.refresh(db_publication)
    return db_publication


def list_publications(session: Session, *, plan_id: int) -> list[Publication]:
    query = select(Publication).where(Publication.plan_id == plan_id).order_by(col(Publication.id))
    return list(session.exec(query))


def get_publication(session: Session, *, publication_id: int) -> Publication:
    return get_or_404(session, Publication, publication_id, "publication")


def revoke_publication(session: Session, *, publication_id: int, actor: str = "") -> Publication:
    """Revoke a link at once; revoking a revoked link changes nothing."""
    db_publication = get_publication(session, publication_id=publication_id)
    if db_publication.revoked_at is not None:
        return db_publication
    db_plan = get_plan(session, plan_id=db_publication.plan_id)
    db_publication.revoked_at = utcnow()
    session.add(db_publication)
    audit.record(
        session,
        actor=actor,
        action="plan.revoke",
        entity="publication",
        entity_id=publication_id,
        team_id=db_plan.team_ids[0] if db_plan.team_ids else None,
        summary=f"Revoked a published link of plan “{db_plan.name}”",
        before={"revoked_at": None},
        after={"revoked_at": db_publication.revoked_at.isoformat()},
    )
    session.commit()
    session.refresh(db_publication)
    return db_publication


def find_published(session: Session, *, token: str) -> tuple[Publication, SavedPlan] | None:
    """The publication with this token and its plan (two primary-key reads at most)."""
    db_publication = session.exec(select(Publication).where(Publication.token == token)).first()
    if db_publication is None:
        return None
    db_plan = session.get(SavedPlan, db_publication.plan_id)
    if db_plan is None:  # pragma: no cover - the foreign key cascades deletes
        return None
    return db_publication, db_plan


# --- importing an exported plan ------------------------------------------------------------


# Clashing titles named in the refusal of an import; the rest are counted.
_CLASHES_LISTED = 5


def _refuse_title_clashes(
    session: Session, db_team: Team, db_period: Period, titles: Sequence[str]
) -> None:
    existing = title_keys_in(session, team_id=db_team.id or 0, period_id=db_period.id or 0)
    clashes = [title for title in titles if title_key(title) in existing]
    if not clashes:
        return
    named = and_list(first_named([quoted(title) for title in clashes], _CLASHES_LISTED))
    are = "is already an initiative" if len(clashes) == 1 else "are already initiatives"
    raise InputError(
        f"csv: {counted(len(clashes), 'title')} of the file {are} of {db_team.name} "
        f"in {db_period.name}: {named}. Nothing was imported; import into another period or "
        "team, or rename or remove those initiatives first.",
        field="csv",
    )


@dataclass(frozen=True)
class ImportOutcome:
    initiative_ids: dict[str, int]  # key in the file -> new initiative id
    scenario: Scenario
    warnings: list[str]


def import_plan(
    session: Session,
    *,
    team_id: int,
    period_id: int,
    imported: ImportedPlan,
    scenario_name: str,
    actor: str = "",
) -> ImportOutcome:
    """Create the file's initiatives, their needs and a scenario, all or nothing.

    Refused while any of the file's titles is already one of the team's initiatives in the
    period (compared as the paste does): importing a plan again would double it.
    """
    db_team = get_team(session, team_id=team_id)
    db_period = get_period(session, period_id=period_id)
    _refuse_title_clashes(
        session, db_team, db_period, [row.initiative.title for row in imported.rows]
    )
    initiatives_in = [
        row.initiative.model_copy(update={"team_id": team_id, "period_id": period_id})
        for row in imported.rows
    ]
    try:
        # One batch for all rows (a fixed number of statements, not a dozen per row).
        records = create_initiatives(session, initiatives_in=initiatives_in, actor=actor)
        ids = {
            row.key: record.row.id or 0 for row, record in zip(imported.rows, records, strict=True)
        }
        add_needs(
            session,
            needs=[(ids[row.key], ids[needed]) for row in imported.rows for needed in row.needs],
        )
        check_marks(session, records)  # again, with the needs between the file's rows
        changes = ScenarioChanges(
            capacity_days=imported.capacity_days,
            confidence=imported.confidence,
            forced_in=[ids[r.key] for r in imported.rows if r.forced == "in"],
            forced_out=[ids[r.key] for r in imported.rows if r.forced == "out"],
        ).to_json()
        db_scenario = create_scenario(
            session,
            team_id=team_id,
            period_id=period_id,
            name=scenario_name,
            changes=changes,
            actor=actor,
            commit=False,
        )
        session.commit()
    except Exception:
        session.rollback()
        raise
    session.refresh(db_scenario)
    warnings = list(imported.warnings)
    spread = imported.default_spread
    single = any(row.initiative.effort.low is None for row in imported.rows)
    if imported.confidence is not None and single and spread not in (None, db_team.default_spread):
        warnings.append(
            f"The plan was made at P{imported.confidence * 100:g} with single-number estimates "
            f"spread ±{(spread or 0) * 100:g} %; {db_team.name} spreads them "
            f"±{db_team.default_spread * 100:g} %, so its plan can differ. Set the spread on the "
            "team page to plan the same."
        )
    return ImportOutcome(initiative_ids=ids, scenario=db_scenario, warnings=warnings)


def count_team_initiatives_in(session: Session, *, team_id: int, period_id: int) -> int:
    query = (
        select(func.count())
        .select_from(Initiative)
        .where(Initiative.team_id == team_id, Initiative.period_id == period_id)
    )
    return int(session.exec(query).one())
