"""Application logic shared by the command line and the web."""
