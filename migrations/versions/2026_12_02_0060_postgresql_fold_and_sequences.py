"""PostgreSQL: the fold() search function, and id sequences past the seeded rows

On SQLite, ``fold()`` is a Python function registered on every connection (app/db.py). On
PostgreSQL it is a SQL function made here, written to give what ``app.names.fold`` gives:
lower case, the letters Unicode does not decompose spelled out (ß -> ss, ø -> o, ...),
compatibility decomposition (NFKD), combining marks dropped, runs of white space made one
space, ends trimmed. It lower-cases through ICU's root collation where the server has ICU,
so the result does not depend on the database's locale.

The first migration seeds relation kinds with explicit ids, which does not move a
PostgreSQL sequence: without setval the next kind would collide with kind 1.

Nothing happens on SQLite.

Revision ID: 0060
Revises: 0050
"""
from alembic import op
import sqlalchemy as sa


revision = '0060'
down_revision = '0050'
branch_labels = None
depends_on = None

# Combining marks of the blocks Latin, Greek and Cyrillic names use (Unicode 15, common practice).
_COMBINING = r"[\u0300-\u036f\u0483-\u0489\u1ab0-\u1aff\u1dc0-\u1dff\u20d0-\u20ff\ufe20-\ufe2f]"

# Kept in step with app.names._SPECIAL (single letters first, then the two-letter ones).
_SINGLE = ("øłđðıς", "olddiσ")
_DOUBLE = (("ß", "ss"), ("æ", "ae"), ("œ", "oe"), ("þ", "th"))


def _fold_body(lower: str) -> str:
    text = lower
    text = f"translate({text}, '{_SINGLE[0]}', '{_SINGLE[1]}')"
    for letter, spelled in _DOUBLE:
        text = f"replace({text}, '{letter}', '{spelled}')"
    text = f"normalize({text}, NFKD)"
    text = f"regexp_replace({text}, '{_COMBINING}', '', 'g')"
    text = rf"regexp_replace({text}, '\s+', ' ', 'g')"
    return f"btrim({text}, ' ')"


def upgrade() -> None:
    bind = op.get_bind()
    if bind.dialect.name != "postgresql":
        return
    icu = bind.execute(sa.text("SELECT 1 FROM pg_collation WHERE collname = 'und-x-icu'")).first() is not None
    lower = "lower(value COLLATE \"und-x-icu\")" if icu else "lower(value)"
    op.execute(
        "CREATE OR REPLACE FUNCTION fold(value text) RETURNS text "
        "LANGUAGE sql IMMUTABLE STRICT PARALLEL SAFE "
        f"AS $$ SELECT {_fold_body(lower)} $$"
    )
    op.execute("SELECT setval(pg_get_serial_sequence('relation_kind', 'id'), (SELECT max(id) FROM relation_kind))")


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        op.execute("DROP FUNCTION IF EXISTS fold(text)")
