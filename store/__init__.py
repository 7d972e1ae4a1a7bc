"""The SQLite store: schema, migrations and queries.

This package knows tables, not politics: it stores what the loader hands it and answers
queries; what a party code or a contest status *means* is decided in ``monitor``.
"""

from store.db import StaleRead, connect, snapshot, transaction, write_from_snapshot
from store.migrations import SCHEMA_VERSION, SchemaTooNew, migrate, schema_version

__all__ = ["SCHEMA_VERSION", "SchemaTooNew", "StaleRead", "connect", "migrate", "schema_version", "snapshot", "transaction",
           "write_from_snapshot"]
