"""Stage 6, leaderboards: externally published scores for one task (a file you bring, OpenML run
evaluations), stored, listed and placed against.

>>> import tabpar
>>> tabpar.leaderboards.list_leaderboards(store="/nonexistent")  # doctest: +SKIP
[]
"""
import importlib

# imported on first use, as in the top-level package: listing commands must not pay for pandas
_EXPORTS = {
    "Leaderboard": "tabpar.leaderboards.store",
    "import_leaderboard": "tabpar.leaderboards.store",
    "list_leaderboards": "tabpar.leaderboards.store",
    "load_leaderboard": "tabpar.leaderboards.store",
    "pull_openml": "tabpar.leaderboards.openml_runs",
    "place_on_leaderboard": "tabpar.leaderboards.placing",
}

__all__ = ["Leaderboard", "import_leaderboard", "pull_openml", "list_leaderboards",
           "load_leaderboard", "place_on_leaderboard"]


def __getattr__(name: str):
    if name not in _EXPORTS:
        raise AttributeError(f"module 'tabpar.leaderboards' has no attribute {name!r}")
    value = getattr(importlib.import_module(_EXPORTS[name]), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(__all__))
