"""Reading the project file into a checked, frozen project (SI values, absolute paths)."""
