"""The input edge: terrain raster and streams (network), CSV tables, one surveyed
profile, land-cover classes. Only these modules read input files."""
