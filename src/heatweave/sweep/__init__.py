"""Corners and Monte Carlo over ambients, parameters and tolerances, on local processes or
Dask, with their tables, files and plots."""
