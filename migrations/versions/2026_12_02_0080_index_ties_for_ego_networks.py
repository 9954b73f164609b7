"""index ties for ego networks: relations by both ends, attestations with the slice's columns

Revision ID: 0080
Revises: 0040
"""
from alembic import op


revision = '0080'
down_revision = '0040'
branch_labels = None
depends_on = None

# The source second: SQLite then reads one relation's entries as one range and filters them in the
# index, instead of seeking once for each value of `evidence IN (...)`.
SLICE_COLUMNS = ["relation_id", "source_id", "deleted_at", "evidence", "certainty", "identification", "earliest", "latest"]


def upgrade() -> None:
    # The ties among the persons of an ego network are found from both ends in the index alone;
    # an index on one end only had to read each relation of a hub's alters to check the other end.
    with op.batch_alter_table("relation") as batch_op:
        batch_op.create_index("ix_relation_person_a_id_person_b_id", ["person_a_id", "person_b_id"])
        batch_op.create_index("ix_relation_person_b_id_person_a_id", ["person_b_id", "person_a_id"])
        batch_op.drop_index("ix_relation_person_a_id")
        batch_op.drop_index("ix_relation_person_b_id")
    # A relation's attestations with every column a slice filters on: counts come from the index.
    with op.batch_alter_table("attestation") as batch_op:
        batch_op.create_index("ix_attestation_relation_slice", SLICE_COLUMNS)
        batch_op.drop_index("ix_attestation_relation_id")


def downgrade() -> None:
    with op.batch_alter_table("attestation") as batch_op:
        batch_op.create_index("ix_attestation_relation_id", ["relation_id"])
        batch_op.drop_index("ix_attestation_relation_slice")
    with op.batch_alter_table("relation") as batch_op:
        batch_op.create_index("ix_relation_person_b_id", ["person_b_id"])
        batch_op.create_index("ix_relation_person_a_id", ["person_a_id"])
        batch_op.drop_index("ix_relation_person_b_id_person_a_id")
        batch_op.drop_index("ix_relation_person_a_id_person_b_id")
