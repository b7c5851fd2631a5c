"""restrict team and member deletes

The rows that went with a team, a member or a period through ON DELETE CASCADE (a team's
members, capacity settings and scenarios, a member's days-off rows, a period's capacity
settings) become ON DELETE RESTRICT. The store deletes them itself, after listing them in the
audit entry; a row another request adds in between makes the database refuse the deletion,
instead of taking that row along unlisted. No row changes; downgrade puts CASCADE back.

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-03 10:40:00.000000
"""

from collections.abc import Sequence

from alembic import op


revision: str = '0006'
down_revision: str | None = '0005'
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

# The names 0004 uses: PostgreSQL's for the unnamed foreign keys, SQLite's batch mode the same.
NAMING = {'fk': '%(table_name)s_%(column_0_name)s_fkey'}
# table -> [(column, referred table)], each CASCADE before and RESTRICT now
FOREIGN_KEYS = {
    'member': [('team_id', 'team')],
    'availability': [('member_id', 'member')],
    'capacity_settings': [('team_id', 'team'), ('period_id', 'period')],
    'scenario': [('team_id', 'team')],
}
# The tables 0005 made AUTOINCREMENT on SQLite: a batch copy must keep that.
NEVER_REUSED = {'member', 'scenario'}


def _set_ondelete(ondelete: str) -> None:
    for table, keys in FOREIGN_KEYS.items():
        with op.batch_alter_table(
            table,
            schema=None,
            naming_convention=NAMING,
            table_kwargs={'sqlite_autoincrement': table in NEVER_REUSED},
        ) as batch_op:
            for column, referred in keys:
                name = NAMING['fk'] % {'table_name': table, 'column_0_name': column}
                batch_op.drop_constraint(name, type_='foreignkey')
                batch_op.create_foreign_key(name, referred, [column], ['id'], ondelete=ondelete)


def upgrade() -> None:
    _set_ondelete('RESTRICT')


def downgrade() -> None:
    _set_ondelete('CASCADE')
