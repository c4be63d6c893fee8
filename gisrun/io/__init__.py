"""Reading and writing files: the edges of gisrun where units and formats are converted."""
