"""Stage 6, leaderboards: externally published scores for one task (a file you bring, OpenML run
evaluations), stored, listed and placed against."""
