"""Grids: exact cell coverage by polygons, class look-up, the overlay and per-cell values."""
