"""Published infiltration and runoff parameter tables and their assignment to units."""
