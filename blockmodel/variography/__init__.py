"""Spatial continuity: experimental variograms, variogram models, fitting, and finding the orientation of continuity."""
