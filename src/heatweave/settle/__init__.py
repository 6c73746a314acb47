"""Periodic steady state of switching circuits: one electrical period, the thermal response
solved exactly over the period."""
