"""The SQLite store: schema, migrations and queries.

This package knows tables, not politics: it stores what the loader hands it and answers
queries; what a party code or a contest status *means* is decided in ``monitor``. Every SQL
statement of levelfield lives here, one module per concern:

==================  ==========================================================================
``tx``              transactions: snapshots, write transactions, read-compute-write
``schema``          the schema, as numbered migrations (SQL)
``migrations``      applying them
``db``              opening the store (pragmas, then the migrations)
``queries``         loads, units, contests and vote lines as delivered (the loader's tables)
``history``         corrections: superseded units and the loads that replaced them
``tables``          reading a whole table with known columns (publish, verify, exports)
``measures``        the ``measures`` table
``flags``           ``pool_seats``, ``tails``, ``watch`` and ``flag_events``
``plans``           plan eras, loaded and inferred
``status``          the counts behind ``levelfield status``
==================  ==========================================================================
"""

from store.db import connect, path_of
from store.migrations import SCHEMA_VERSION, SchemaTooNew, migrate, schema_version
from store.tx import StaleRead, snapshot, transaction, write_from_snapshot

__all__ = ["SCHEMA_VERSION", "SchemaTooNew", "StaleRead", "connect", "migrate", "path_of", "schema_version",
           "snapshot", "transaction", "write_from_snapshot"]
