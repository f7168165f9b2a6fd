"""The section kernel: exact geometry and Manning hydraulics of piecewise-linear
profiles, every transect of a reach at every stage in one pass."""
