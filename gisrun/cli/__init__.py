"""Command line: thin click commands over the Python API."""
