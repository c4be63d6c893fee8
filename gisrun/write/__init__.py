"""Writing a finished run: the GeoPackage and the files beside it, drawn from the result."""
