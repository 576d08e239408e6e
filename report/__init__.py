"""rimewatch.report"""
