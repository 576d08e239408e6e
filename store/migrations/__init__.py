"""Alembic migrations of the rimewatch database (run by ``rimewatch.store.connect``)."""
