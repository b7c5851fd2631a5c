"""restrict deletes

Foreign keys that deleted or detached rows the store refuses to lose become ON DELETE
RESTRICT, so the database refuses a delete that another request made wrong after the store
checked it (a need, an effort line, an initiative or a use of a period added in between):
initiative.period_id and saved_plan.period_id (were SET NULL), availability.period_id,
scenario.period_id, effort_line.team_id and initiative_need.needed_id (were CASCADE).
No row changes; downgrade puts the old rules back.

Revision ID: 0004
Revises: 0003
Create Date: 2026-12-02 16:50:00.000000
"""

from collections.abc import Sequence

from alembic import op


revision: str = '0004'
down_revision: str | None = '0003'
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

# PostgreSQL's names for the unnamed foreign keys of 0001 and 0002; SQLite's batch mode names
# the reflected ones the same way, so one name serves both.
NAMING = {'fk': '%(table_name)s_%(column_0_name)s_fkey'}
# (table, column, referred table, ondelete before, ondelete now)
FOREIGN_KEYS = [
    ('initiative', 'period_id', 'period', 'SET NULL', 'RESTRICT'),
    ('saved_plan', 'period_id', 'period', 'SET NULL', 'RESTRICT'),
    ('availability', 'period_id', 'period', 'CASCADE', 'RESTRICT'),
    ('scenario', 'period_id', 'period', 'CASCADE', 'RESTRICT'),
    ('effort_line', 'team_id', 'team', 'CASCADE', 'RESTRICT'),
    ('initiative_need', 'needed_id', 'initiative', 'CASCADE', 'RESTRICT'),
]


def _set_ondelete(table: str, column: str, referred: str, ondelete: str) -> None:
    name = NAMING['fk'] % {'table_name': table, 'column_0_name': column}
    with op.batch_alter_table(table, schema=None, naming_convention=NAMING) as batch_op:
        batch_op.drop_constraint(name, type_='foreignkey')
        batch_op.create_foreign_key(name, referred, [column], ['id'], ondelete=ondelete)


def upgrade() -> None:
    for table, column, referred, _, now in FOREIGN_KEYS:
        _set_ondelete(table, column, referred, now)


def downgrade() -> None:
    for table, column, referred, before, _ in reversed(FOREIGN_KEYS):
        _set_ondelete(table, column, referred, before)
