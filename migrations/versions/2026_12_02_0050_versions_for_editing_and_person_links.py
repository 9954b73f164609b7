"""a version on every editable record, persons possibly the same, redaction mark on audit entries

Revision ID: 0050
Revises: 0004
"""
from alembic import op
import sqlalchemy as sa


revision = '0050'
down_revision = '0004'
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
    # "Possibly the same as": a pair of persons (sorted ids) with a note, short of a merge.
    op.create_table(
        'person_link',
        sa.Column('id', sa.Integer(), nullable=False),
        sa.Column('person_a', sa.Integer(), nullable=False),
        sa.Column('person_b', sa.Integer(), nullable=False),
        sa.Column('note', sa.Text(), nullable=True),
        sa.Column('created_by', sa.String(length=100), nullable=False),
        sa.Column('created_at', sa.DateTime(), nullable=False),
        sa.CheckConstraint('person_a < person_b', name=op.f('ck_person_link_pair_sorted')),
        sa.ForeignKeyConstraint(['person_a'], ['person.id'], name=op.f('fk_person_link_person_a_person'),
                                onupdate='RESTRICT', ondelete='RESTRICT'),
        sa.ForeignKeyConstraint(['person_b'], ['person.id'], name=op.f('fk_person_link_person_b_person'),
                                onupdate='RESTRICT', ondelete='RESTRICT'),
        sa.PrimaryKeyConstraint('id', name=op.f('pk_person_link')),
        sa.UniqueConstraint('person_a', 'person_b', name=op.f('uq_person_link_person_a_person_b')),
    )
    op.create_index(op.f('ix_person_link_person_a'), 'person_link', ['person_a'])
    op.create_index(op.f('ix_person_link_person_b'), 'person_link', ['person_b'])


def downgrade() -> None:
    op.drop_index(op.f('ix_person_link_person_b'), table_name='person_link')
    op.drop_index(op.f('ix_person_link_person_a'), table_name='person_link')
    op.drop_table('person_link')
    with op.batch_alter_table('audit_entry') as batch:
        batch.drop_column('redacted_at')
    for table in reversed(EDITABLE):
        with op.batch_alter_table(table) as batch:
            batch.drop_column('version')
