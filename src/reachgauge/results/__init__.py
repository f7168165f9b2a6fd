"""The output edge: the result schema, GeoPackage and CSV writers, the report."""
