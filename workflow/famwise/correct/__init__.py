"""Corrections for multiple comparisons."""
