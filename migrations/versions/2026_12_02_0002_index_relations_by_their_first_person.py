"""index relations by their first person

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-02 03:45:47.533956
"""
from alembic import op
import sqlalchemy as sa


revision = '0002'
down_revision = '0001'
branch_labels = None
depends_on = None


def upgrade() -> None:
    # An ego network looks up the relations of a person from either end.
    with op.batch_alter_table("relation") as batch_op:
        batch_op.create_index("ix_relation_person_a_id", ["person_a_id"])


def downgrade() -> None:
    with op.batch_alter_table("relation") as batch_op:
        batch_op.drop_index("ix_relation_person_a_id")
