"""rimewatch.ingest"""
