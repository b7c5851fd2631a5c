"""initiative title keys

The database itself now refuses a second initiative of one title in a team and period, so the
second of two requests that both passed the store's check in the same instant is refused too.
initiative.title_key holds the title as the app compares titles (Unicode compatibility
caseless match, runs of white space as one space, trimmed, long keys ending in a digest:
server.selector.set_names.name_key, copied below so this revision keeps meaning what it
meant). Unique indexes allow one key per team and period
(uq_initiative_title_key) and one per team in the backlog (uq_initiative_backlog_title_key,
partial, since NULL periods never clash in a unique index).

Existing twins. A database may hold two initiatives of one team and period whose titles
compare equal, written before titles were refused. Nothing is deleted: the oldest row (lowest
id) keeps its title, each later one gets " (2)", " (3)", ... appended (the first number whose
title is still free there; the title is shortened to fit 200 characters first) and its version
goes up by one, so a form opened before the upgrade is refused instead of undoing the rename.
Downgrade drops the key column and its indexes; renamed titles stay renamed.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-02 16:40:00.000000
"""

import hashlib
import unicodedata
from collections import defaultdict
from collections.abc import Sequence

import sqlalchemy as sa
import sqlmodel
from alembic import op


revision: str = '0003'
down_revision: str | None = '0002'
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

TITLE_MAX = 200
TITLE_KEY_MAX = 3 * TITLE_MAX
BACKLOG_ONLY = sa.text('period_id IS NULL')


def title_key(title: str) -> str:
    # Compatibility caseless match (Unicode Standard 3.13, D146), white space runs as one.
    folded = unicodedata.normalize('NFD', title).casefold()
    folded = unicodedata.normalize('NFKD', unicodedata.normalize('NFKD', folded).casefold())
    key = ' '.join(folded.split())
    if len(key) <= TITLE_KEY_MAX:
        return key
    return key[: TITLE_KEY_MAX - 64] + hashlib.sha256(key.encode()).hexdigest()


def _parted_titles(rows: Sequence[tuple[int, int, int | None, str]]) -> dict[int, str]:
    """id -> new title for each later twin among (id, team_id, period_id, title) rows."""
    taken: dict[tuple[int, int | None], set[str]] = defaultdict(set)
    for _, team_id, period_id, title in rows:
        taken[(team_id, period_id)].add(title_key(title))
    kept: dict[tuple[int, int | None], set[str]] = defaultdict(set)
    renamed: dict[int, str] = {}
    for row_id, team_id, period_id, title in sorted(rows):
        place = (team_id, period_id)
        key = title_key(title)
        if key not in kept[place]:
            kept[place].add(key)
            continue
        number = 2
        while True:
            suffix = f' ({number})'
            candidate = title[: TITLE_MAX - len(suffix)].rstrip() + suffix
            if title_key(candidate) not in taken[place]:
                break
            number += 1
        taken[place].add(title_key(candidate))
        kept[place].add(title_key(candidate))
        renamed[row_id] = candidate
    return renamed


def _fill_title_keys() -> None:
    bind = op.get_bind()
    initiative = sa.table(
        'initiative',
        sa.column('id', sa.Integer()),
        sa.column('team_id', sa.Integer()),
        sa.column('period_id', sa.Integer()),
        sa.column('title', sa.String()),
        sa.column('title_key', sa.String()),
        sa.column('version', sa.Integer()),
    )
    rows = [
        (row.id, row.team_id, row.period_id, row.title)
        for row in bind.execute(
            sa.select(initiative.c.id, initiative.c.team_id, initiative.c.period_id, initiative.c.title)
        )
    ]
    renamed = _parted_titles(rows)
    for row_id, _, _, title in rows:
        values: dict[str, object] = {'title_key': title_key(renamed.get(row_id, title))}
        if row_id in renamed:
            values |= {'title': renamed[row_id], 'version': initiative.c.version + 1}
        bind.execute(initiative.update().where(initiative.c.id == row_id).values(**values))


def upgrade() -> None:
    with op.batch_alter_table('initiative', schema=None) as batch_op:
        batch_op.add_column(
            sa.Column('title_key', sqlmodel.sql.sqltypes.AutoString(length=TITLE_KEY_MAX), nullable=True)
        )
    _fill_title_keys()
    with op.batch_alter_table('initiative', schema=None) as batch_op:
        batch_op.alter_column(
            'title_key', existing_type=sqlmodel.sql.sqltypes.AutoString(length=TITLE_KEY_MAX), nullable=False
        )
        batch_op.create_index('uq_initiative_title_key', ['team_id', 'period_id', 'title_key'], unique=True)
        batch_op.create_index(
            'uq_initiative_backlog_title_key',
            ['team_id', 'title_key'],
            unique=True,
            sqlite_where=BACKLOG_ONLY,
            postgresql_where=BACKLOG_ONLY,
        )


def downgrade() -> None:
    with op.batch_alter_table('initiative', schema=None) as batch_op:
        batch_op.drop_index('uq_initiative_backlog_title_key')
        batch_op.drop_index('uq_initiative_title_key')
        batch_op.drop_column('title_key')
