"""period and days-off ids never reused

0005 made the tables whose ids are named elsewhere AUTOINCREMENT on SQLite, so a deleted
row's id never comes back for another row. Periods and days-off rows are named by id too: in
the audit trail (the Changes list says a deleted row was deleted by reading its entries), in
the JSON API's URLs and ETags a client keeps, and periods in saved plans and scenarios. On
SQLite a new period or days-off row took the id of the newest deleted one, so a client's
request for the deleted row reached the new one, and the Changes list told the new row's
story under the old row's entries. Both tables become AUTOINCREMENT on SQLite; PostgreSQL's
sequences never hand an id out twice: nothing changes there. No row changes; downgrade makes
the tables plain again.

Revision ID: 0008
Revises: 0007
Create Date: 2026-12-04 01:10:00.000000
"""

from collections.abc import Sequence

from alembic import op


revision: str = '0008'
down_revision: str | None = '0007'
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

TABLES = ('period', 'availability')


def _recreate(autoincrement: bool) -> None:
    if op.get_bind().dialect.name != 'sqlite':
        return
    for table in TABLES:
        with op.batch_alter_table(
            table, recreate='always', table_kwargs={'sqlite_autoincrement': autoincrement}
        ):
            pass


def upgrade() -> None:
    _recreate(autoincrement=True)


def downgrade() -> None:
    _recreate(autoincrement=False)
