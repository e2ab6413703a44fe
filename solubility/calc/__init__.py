"""Calculations: validated requests, host primitives, solvus."""
