"""Drillhole data: reading and checking the tables, desurveying, compositing and capping."""
