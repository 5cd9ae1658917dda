"""Stage 6, leaderboards: externally published scores for one task (a file you bring, OpenML run
evaluations), stored, listed and placed against.

>>> import tabpar
>>> tabpar.leaderboards.list_leaderboards(store="/nonexistent")  # doctest: +SKIP
[]
"""
from tabpar.leaderboards.openml_runs import pull_openml
from tabpar.leaderboards.placing import place_on_leaderboard
from tabpar.leaderboards.store import (
                                       Leaderboard,
                                       import_leaderboard,
                                       list_leaderboards,
                                       load_leaderboard,
)

__all__ = ["Leaderboard", "import_leaderboard", "pull_openml", "list_leaderboards",
           "load_leaderboard", "place_on_leaderboard"]
