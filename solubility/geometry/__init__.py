"""Geometry: host structures, interstitial sites and misfit (numpy and scipy only)."""
