"""a version on every editable record, a redaction mark on audit entries

Revision ID: 0050
Revises: 0030
"""
from alembic import op
import sqlalchemy as sa


revision = '0050'
down_revision = '0030'
branch_labels = None
depends_on = None

EDITABLE = ('person', 'source', 'relation', 'group', 'membership', 'attestation')


def upgrade() -> None:
    # Optimistic concurrency: a form carries the version it was loaded at; a save on an older one is refused.
    for table in EDITABLE:
        with op.batch_alter_table(table) as batch:
            batch.add_column(sa.Column('version', sa.Integer(), server_default='1', nullable=False))
    with op.batch_alter_table('audit_entry') as batch:
        batch.add_column(sa.Column('redacted_at', sa.DateTime(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table('audit_entry') as batch:
        batch.drop_column('redacted_at')
    for table in reversed(EDITABLE):
        with op.batch_alter_table(table) as batch:
            batch.drop_column('version')
