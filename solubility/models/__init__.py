"""Models: sublattice models, TDB text and closed forms (no pycalphad)."""
