"""Mechanics: derivation of the equations of motion and the numerical analyses."""
