"""The block model's geometry: the grid, closed solids and surfaces, and block proportions by domain."""
