"""Results: Datasets, exports and figures."""
