"""Fault detection and diagnosis: pure functions from readings to findings and events.

``pipeline.analyze_unit`` is the entry point (frames in, plain objects out; no database, no
clock). See docs/detection.md.
"""
