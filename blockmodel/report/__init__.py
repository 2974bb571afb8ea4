"""Rendering: grade–tonnage tables, plots, 3D views and the HTML report."""
