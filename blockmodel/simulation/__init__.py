"""Gaussian random fields (spectral simulation)."""
