"""Stage 2, procedure: the baseline transformer, its variants and user procedures, the leakage guard, the shared prepare path."""
