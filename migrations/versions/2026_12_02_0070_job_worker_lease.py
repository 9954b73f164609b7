"""the worker that runs a job: host and process id, so a dead worker's job is told from a live one's

Revision ID: 0070
Revises: 0060
"""
from alembic import op
import sqlalchemy as sa


revision = '0070'
down_revision = '0060'
branch_labels = None
depends_on = None


def upgrade() -> None:
    # A running job names the worker process holding it: a starting server requeues only jobs whose
    # worker is gone, and a polling page learns that a killed worker's job failed.
    with op.batch_alter_table('job', schema=None) as batch_op:
        batch_op.add_column(sa.Column('worker_host', sa.String(length=255), nullable=True))
        batch_op.add_column(sa.Column('worker_pid', sa.Integer(), nullable=True))


def downgrade() -> None:
    with op.batch_alter_table('job', schema=None) as batch_op:
        batch_op.drop_column('worker_pid')
        batch_op.drop_column('worker_host')
