"""queue heavy measures for the background worker

Revision ID: 0004
Revises: 0003
"""
from alembic import op
import sqlalchemy as sa


revision = '0004'
down_revision = '0003'
branch_labels = None
depends_on = None


def upgrade() -> None:
    # One row per requested heavy measure; the worker process takes them oldest first.
    op.create_table(
        'job',
        sa.Column('id', sa.Integer(), nullable=False),
        sa.Column('measure', sa.String(length=50), nullable=False),
        sa.Column('options', sa.String(length=500), nullable=False),
        sa.Column('slice_key', sa.Text(), nullable=False),
        sa.Column('visibility', sa.String(length=100), nullable=False),
        sa.Column('data_version', sa.Integer(), nullable=False),
        sa.Column('state', sa.String(length=10), nullable=False),
        sa.Column('progress', sa.Float(), nullable=False),
        sa.Column('requested_by', sa.String(length=100), nullable=False),
        sa.Column('created_at', sa.DateTime(), nullable=False),
        sa.Column('started_at', sa.DateTime(), nullable=True),
        sa.Column('finished_at', sa.DateTime(), nullable=True),
        sa.Column('error', sa.Text(), nullable=True),
        sa.CheckConstraint("state IN ('queued', 'running', 'done', 'failed')", name=op.f('ck_job_state_known')),
        sa.CheckConstraint('progress >= 0 AND progress <= 1', name=op.f('ck_job_progress_in_range')),
        sa.PrimaryKeyConstraint('id', name=op.f('pk_job')),
    )
    op.create_index('ix_job_state_created', 'job', ['state', 'created_at'])


def downgrade() -> None:
    op.drop_index('ix_job_state_created', table_name='job')
    op.drop_table('job')
