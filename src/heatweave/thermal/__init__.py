"""The thermal circuit built from a bound annotation, its heat balance, and the assembled
thermal ODE and its exact propagator."""
