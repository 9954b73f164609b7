"""link two persons as possibly the same, without merging them

Revision ID: 0030
Revises: 0004
"""
from alembic import op
import sqlalchemy as sa


revision = '0030'
down_revision = '0004'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        'person_link',
        sa.Column('id', sa.Integer(), nullable=False),
        sa.Column('person_a_id', sa.Integer(), nullable=False),
        sa.Column('person_b_id', sa.Integer(), nullable=False),
        sa.Column('note', sa.Text(), nullable=True),
        sa.Column('created_by', sa.String(length=100), nullable=False),
        sa.Column('created_at', sa.DateTime(), nullable=False),
        sa.CheckConstraint('person_a_id < person_b_id', name=op.f('ck_person_link_pair_sorted')),
        sa.ForeignKeyConstraint(['person_a_id'], ['person.id'], name=op.f('fk_person_link_person_a_id_person'),
                                onupdate='RESTRICT', ondelete='RESTRICT'),
        sa.ForeignKeyConstraint(['person_b_id'], ['person.id'], name=op.f('fk_person_link_person_b_id_person'),
                                onupdate='RESTRICT', ondelete='RESTRICT'),
        sa.PrimaryKeyConstraint('id', name=op.f('pk_person_link')),
        sa.UniqueConstraint('person_a_id', 'person_b_id', name=op.f('uq_person_link_person_a_id_person_b_id')),
    )
    op.create_index(op.f('ix_person_link_person_a_id'), 'person_link', ['person_a_id'], unique=False)
    op.create_index(op.f('ix_person_link_person_b_id'), 'person_link', ['person_b_id'], unique=False)


def downgrade() -> None:
    op.drop_index(op.f('ix_person_link_person_b_id'), table_name='person_link')
    op.drop_index(op.f('ix_person_link_person_a_id'), table_name='person_link')
    op.drop_table('person_link')
