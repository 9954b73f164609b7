"""store the results of measures

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-02 03:48:05.377799
"""
from alembic import op
import sqlalchemy as sa


revision = '0003'
down_revision = '0002'
branch_labels = None
depends_on = None


def upgrade() -> None:
    # One row per measure, options, slice and visibility; the data version says how fresh it is.
    op.create_table(
        'measure_result',
        sa.Column('id', sa.Integer(), nullable=False),
        sa.Column('measure', sa.String(length=50), nullable=False),
        sa.Column('options', sa.String(length=500), nullable=False),
        sa.Column('slice_key', sa.Text(), nullable=False),
        sa.Column('visibility', sa.String(length=100), nullable=False),
        sa.Column('data_version', sa.Integer(), nullable=False),
        sa.Column('result_json', sa.Text(), nullable=False),
        sa.Column('computed_at', sa.DateTime(), nullable=False),
        sa.Column('seconds', sa.Float(), nullable=False),
        sa.CheckConstraint('seconds >= 0', name=op.f('ck_measure_result_seconds_not_negative')),
        sa.PrimaryKeyConstraint('id', name=op.f('pk_measure_result')),
        sa.UniqueConstraint('measure', 'options', 'slice_key', 'visibility', name='uq_measure_result_request'),
    )


def downgrade() -> None:
    op.drop_table('measure_result')
