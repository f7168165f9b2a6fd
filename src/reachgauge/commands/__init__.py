"""One module per command; each a thin layer over the Python API."""
