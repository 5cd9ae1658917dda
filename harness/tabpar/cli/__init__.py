"""Stage 9, command line: one module per command, a thin layer over the Python API."""
