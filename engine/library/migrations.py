"""Numbered changes of the library's schema, from one schema version to the next.

Migration ``n`` turns a library of schema version ``n - 1`` into one of version ``n``.
:class:`~engine.library.store.Library` applies the pending ones in order, all in one
transaction, when it opens an older library. A migration is written against the schema
as it stood then, never against today's tables, and once released it is never changed:
a later change is a new migration. The statements are ones SQLite and PostgreSQL both
accept.

Examples
--------
>>> for m in MIGRATIONS:
...     print(m.number, m.description)
2 add the bulk_modulus column to materials
3 add the amplitude_sweeps table
4 add the fit_banks table
>>> import sqlalchemy as sa
>>> add_column_ddl(sa.create_engine("sqlite://").dialect, "materials",
...                sa.Column("bulk_modulus", sa.Float))
'ALTER TABLE materials ADD COLUMN bulk_modulus FLOAT'
"""

from __future__ import annotations

from collections.abc import Callable
from typing import NamedTuple

import sqlalchemy as sa


class Migration(NamedTuple):
    number: int  # the schema version this migration produces
    description: str
    apply: Callable[[sa.Connection], None]


def add_column_ddl(dialect, table: str, column: sa.Column) -> str:
    """``ALTER TABLE ... ADD COLUMN ...`` for a nullable ``column`` without a default."""
    quote = dialect.identifier_preparer.quote
    kind = column.type.compile(dialect=dialect)
    return f"ALTER TABLE {quote(table)} ADD COLUMN {quote(column.name)} {kind}"


def add_column(conn: sa.Connection, table: str, column: sa.Column) -> None:
    """Add a nullable ``column`` to ``table`` unless the table has it already."""
    present = {c["name"] for c in sa.inspect(conn).get_columns(table)}
    if column.name not in present:
        conn.execute(sa.DDL(add_column_ddl(conn.dialect, table, column)))


def _add_bulk_modulus(conn: sa.Connection) -> None:
    add_column(conn, "materials", sa.Column("bulk_modulus", sa.Float))  # [MPa]


def _add_amplitude_sweeps(conn: sa.Connection) -> None:
    """The table of strain-amplitude sweeps, as schema version 3 defines it."""
    metadata = sa.MetaData()
    # The imports table as it stands at version 3, only so that the foreign key resolves.
    sa.Table("imports", metadata, sa.Column("import_id", sa.Integer, primary_key=True))
    table = sa.Table(
        "amplitude_sweeps",
        metadata,
        sa.Column("sweep_id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("material_id", sa.String(200), nullable=False, index=True),
        sa.Column("import_id", sa.Integer, sa.ForeignKey("imports.import_id"), nullable=False),
        sa.Column("data_hash", sa.String(64), nullable=False),
        sa.Column("n_points", sa.Integer, nullable=False),
        # float64 little-endian, n x 5: strain [-], storage modulus [Pa], loss factor [-],
        # temperature [degC], frequency [Hz]
        sa.Column("points", sa.LargeBinary, nullable=False),
        sa.Column("created_at", sa.String(32), nullable=False),
    )
    table.create(conn, checkfirst=True)


def _add_fit_banks(conn: sa.Connection) -> None:
    """The table of stored curve banks, as schema version 4 defines it."""
    table = sa.Table(
        "fit_banks",
        sa.MetaData(),
        sa.Column("options", sa.String(200), primary_key=True),
        sa.Column("engine_version", sa.String(32), primary_key=True),
        sa.Column("grades", sa.Integer, nullable=False),
        sa.Column("library_version", sa.Integer, nullable=False),
        # engine.curves.bankfile: an uncompressed .npz archive, no pickled objects
        sa.Column("bank", sa.LargeBinary, nullable=False),
        sa.Column("created_at", sa.String(32), nullable=False),
    )
    table.create(conn, checkfirst=True)


MIGRATIONS: tuple[Migration, ...] = (
    Migration(2, "add the bulk_modulus column to materials", _add_bulk_modulus),
    Migration(3, "add the amplitude_sweeps table", _add_amplitude_sweeps),
    Migration(4, "add the fit_banks table", _add_fit_banks),
)


def pending(stored: int, target: int, migrations=None) -> list[Migration]:
    """The migrations that take schema version ``stored`` to ``target``, in order.

    ``migrations`` defaults to :data:`MIGRATIONS` as it is at the call. ValueError if a
    step is missing.
    """
    steps = sorted(MIGRATIONS if migrations is None else migrations, key=lambda m: m.number)
    chosen = [m for m in steps if stored < m.number <= target]
    if [m.number for m in chosen] != list(range(stored + 1, target + 1)):
        raise ValueError(f"no complete chain of migrations from version {stored} to {target}")
    return chosen
