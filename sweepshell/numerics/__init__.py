"""Numerical building blocks shared by several models (numpy/scipy only)."""
