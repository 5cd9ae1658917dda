"""Stage 5, evaluation: shared statistics, published references, placement of a score, comparison of procedures."""
