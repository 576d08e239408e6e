"""rimewatch.detect"""
