"""count failed sign-ins, lock a user name, end a user's sessions

Revision ID: 0040
Revises: 0070
"""
from alembic import op
import sqlalchemy as sa


revision = '0040'
down_revision = '0070'
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table('user', schema=None) as batch_op:
        batch_op.add_column(sa.Column('failed_logins', sa.Integer(), server_default='0', nullable=False))
        batch_op.add_column(sa.Column('locked_until', sa.DateTime(), nullable=True))
        batch_op.add_column(sa.Column('session_epoch', sa.Integer(), server_default='0', nullable=False))


def downgrade() -> None:
    with op.batch_alter_table('user', schema=None) as batch_op:
        batch_op.drop_column('session_epoch')
        batch_op.drop_column('locked_until')
        batch_op.drop_column('failed_logins')
