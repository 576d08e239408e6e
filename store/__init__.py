"""rimewatch.store"""
