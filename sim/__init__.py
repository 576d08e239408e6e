"""rimewatch.sim"""
