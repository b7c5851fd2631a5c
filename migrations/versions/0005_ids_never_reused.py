"""ids never reused

SQLite hands out the largest id again once the row holding it is deleted (a rowid table
without AUTOINCREMENT). Scenarios name initiatives and members by id in their changes, saved
plans name their teams and initiatives by id, and undo brings a deleted initiative back under
its id: a new row taking a deleted row's id would take its place in all of those. So the
tables whose ids are named that way (team, member, initiative, scenario) become AUTOINCREMENT
tables on SQLite, whose ids only grow. PostgreSQL's sequences never hand an id out twice:
nothing changes there.

The batch copy of initiative keeps its columns, foreign keys and the plain title index; the
backlog's partial title index is made again by hand, so its condition (period_id IS NULL)
cannot be lost by reflection. No row changes; downgrade makes the tables plain again.

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-02 18:00:00.000000
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op


revision: str = '0005'
down_revision: str | None = '0004'
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

TABLES = ('team', 'member', 'initiative', 'scenario')
BACKLOG_INDEX = 'uq_initiative_backlog_title_key'


def _recreate(autoincrement: bool) -> None:
    if op.get_bind().dialect.name != 'sqlite':
        return
    for table in TABLES:
        if table == 'initiative':
            op.drop_index(BACKLOG_INDEX, table_name='initiative')
        with op.batch_alter_table(
            table, recreate='always', table_kwargs={'sqlite_autoincrement': autoincrement}
        ):
            pass
        if table == 'initiative':
            op.create_index(
                BACKLOG_INDEX,
                'initiative',
                ['team_id', 'title_key'],
                unique=True,
                sqlite_where=sa.text('period_id IS NULL'),
            )


def upgrade() -> None:
    _recreate(autoincrement=True)


def downgrade() -> None:
    _recreate(autoincrement=False)
