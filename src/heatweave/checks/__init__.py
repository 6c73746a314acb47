"""Limits and ratings held against a run's results, and lint of a deck with its annotation."""
