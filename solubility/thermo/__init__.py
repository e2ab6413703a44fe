"""Thermo: the one adapter to pycalphad's internals and a pure-numpy optimiser."""
