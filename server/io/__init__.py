"""File formats in and out: the model file, GIS files, probe tables, exports."""
