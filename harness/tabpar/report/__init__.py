"""Stage 8, report: plots (matplotlib, Display-style) and rendered reports."""
