"""title keys without invisible characters

Titles are now compared with invisible format characters (Unicode general category Cf:
zero-width spaces and joiners, the soft hyphen) left out, as team, member and period names
already were, so "Fare\u200bcapping" and "Farecapping", which read the same on every page,
cannot both be a team's initiative in one period. initiative.title_key is recomputed by that
rule (server.selector.set_names.name_key as of this revision, copied below so the revision
keeps meaning what it meant).

Twins this makes. Rows that were two titles and are now one are parted as 0003 parted
twins: nothing is deleted, the oldest row (lowest id) keeps its title, each later one gets
" (2)", " (3)", ... appended (the first number whose title is still free there, the title
shortened to fit 200 characters first) and its version goes up by one, so a form opened
before the upgrade is refused instead of undoing the rename. The two unique title indexes are
dropped while the keys are rewritten and created again after.

Downgrade recomputes the keys by the earlier rule (keys that differ now differed then too);
renamed titles stay renamed.

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-03 12:45:00.000000
"""

import hashlib
import unicodedata
from collections import defaultdict
from collections.abc import Callable, Sequence

import sqlalchemy as sa
from alembic import op


revision: str = '0007'
down_revision: str | None = '0006'
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

TITLE_MAX = 200
TITLE_KEY_MAX = 3 * TITLE_MAX
BACKLOG_ONLY = sa.text('period_id IS NULL')
INITIATIVE = sa.table(
    'initiative',
    sa.column('id', sa.Integer()),
    sa.column('team_id', sa.Integer()),
    sa.column('period_id', sa.Integer()),
    sa.column('title', sa.String()),
    sa.column('title_key', sa.String()),
    sa.column('version', sa.Integer()),
)


def key_before(title: str) -> str:
    # Compatibility caseless match (Unicode Standard 3.13, D146), white space runs as one.
    folded = unicodedata.normalize('NFD', title).casefold()
    folded = unicodedata.normalize('NFKD', unicodedata.normalize('NFKD', folded).casefold())
    key = ' '.join(folded.split())
    if len(key) <= TITLE_KEY_MAX:
        return key
    return key[: TITLE_KEY_MAX - 64] + hashlib.sha256(key.encode()).hexdigest()


def key_now(title: str) -> str:
    # The same, with format characters (category Cf) left out first.
    return key_before(''.join(ch for ch in title if unicodedata.category(ch) != 'Cf'))


def _parted_titles(rows: Sequence[tuple[int, int, int | None, str]]) -> dict[int, str]:
    """id -> new title for each later twin (by key_now) among (id, team, period, title)."""
    taken: dict[tuple[int, int | None], set[str]] = defaultdict(set)
    for _, team_id, period_id, title in rows:
        taken[(team_id, period_id)].add(key_now(title))
    kept: dict[tuple[int, int | None], set[str]] = defaultdict(set)
    renamed: dict[int, str] = {}
    for row_id, team_id, period_id, title in sorted(rows):
        place = (team_id, period_id)
        key = key_now(title)
        if key not in kept[place]:
            kept[place].add(key)
            continue
        number = 2
        while True:
            suffix = f' ({number})'
            candidate = title[: TITLE_MAX - len(suffix)].rstrip() + suffix
            if key_now(candidate) not in taken[place]:
                break
            number += 1
        taken[place].add(key_now(candidate))
        kept[place].add(key_now(candidate))
        renamed[row_id] = candidate
    return renamed


def _drop_title_indexes() -> None:
    op.drop_index('uq_initiative_backlog_title_key', table_name='initiative')
    op.drop_index('uq_initiative_title_key', table_name='initiative')


def _create_title_indexes() -> None:
    op.create_index(
        'uq_initiative_title_key', 'initiative', ['team_id', 'period_id', 'title_key'], unique=True
    )
    op.create_index(
        'uq_initiative_backlog_title_key',
        'initiative',
        ['team_id', 'title_key'],
        unique=True,
        sqlite_where=BACKLOG_ONLY,
        postgresql_where=BACKLOG_ONLY,
    )


def _rewrite_keys(key: Callable[[str], str], renamed: dict[int, str] | None = None) -> None:
    bind = op.get_bind()
    rows = [
        (row.id, row.team_id, row.period_id, row.title)
        for row in bind.execute(
            sa.select(INITIATIVE.c.id, INITIATIVE.c.team_id, INITIATIVE.c.period_id, INITIATIVE.c.title)
        )
    ]
    renamed = _parted_titles(rows) if renamed is None else renamed
    for row_id, _, _, title in rows:
        values: dict[str, object] = {'title_key': key(renamed.get(row_id, title))}
        if row_id in renamed:
            values |= {'title': renamed[row_id], 'version': INITIATIVE.c.version + 1}
        bind.execute(INITIATIVE.update().where(INITIATIVE.c.id == row_id).values(**values))


def upgrade() -> None:
    _drop_title_indexes()
    _rewrite_keys(key_now)
    _create_title_indexes()


def downgrade() -> None:
    _drop_title_indexes()
    _rewrite_keys(key_before, renamed={})
    _create_title_indexes()
