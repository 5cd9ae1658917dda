"""Where tabpar reads and writes: the data that ships inside the package, and the user's folders.

Every folder tabpar resolves goes through this module, so ``~`` expansion, environment overrides
and the platform's conventions (``platformdirs``) are applied the same way everywhere.
"""
from __future__ import annotations

import os
from importlib import resources
from pathlib import Path

from tabpar.common.errors import UserError

CACHE_ENV = "TABPAR_CACHE"
LEADERBOARDS_ENV = "TABPAR_LEADERBOARDS"
OPENML_CACHE_ENV = "TABPAR_OPENML_CACHE"


def package_folder() -> Path:
    """The installed ``tabpar`` package folder (resolved)."""
    return Path(str(resources.files("tabpar"))).resolve()


def builtin_folder(name: str) -> Path:
    """A folder that ships inside the package: ``suites`` or ``results``.

    In a checkout these are links to the top-level ``suites/`` and ``results/``; in a wheel they
    are package data. Read through ``importlib.resources`` so both work the same.
    """
    return Path(str(resources.files("tabpar") / "builtin" / name))


def user_folder(given: str | Path | None, env: str | None, kind: str, *parts: str) -> Path:
    """``given`` if set, else ``$env`` if set, else the platform's folder of ``kind``.

    ``kind`` is ``cache`` (``~/.cache/tabpar`` on Linux) or ``data``
    (``~/.local/share/tabpar``); ``parts`` are appended to the platform folder only.
    """
    if given:
        return Path(given).expanduser()
    if env and os.environ.get(env):
        return Path(os.environ[env]).expanduser()
    import platformdirs

    base = (platformdirs.user_cache_dir("tabpar", appauthor=False) if kind == "cache"
            else platformdirs.user_data_dir("tabpar", appauthor=False))
    return Path(base).joinpath(*parts)


def cache_root(given: str | Path | None = None) -> Path:
    """The prepared-array cache: ``given``, ``$TABPAR_CACHE`` or the user's cache folder."""
    return user_folder(given, CACHE_ENV, "cache")


def leaderboard_store(given: str | Path | None = None) -> Path:
    """The leaderboard store: ``given``, ``$TABPAR_LEADERBOARDS`` or the user's data folder."""
    return user_folder(given, LEADERBOARDS_ENV, "data", "leaderboards")


def openml_cache(given: str | Path | None = None) -> Path:
    """The OpenML download cache: ``given``, ``$TABPAR_OPENML_CACHE`` or ``tabpar/openml`` in
    the user's cache folder."""
    return user_folder(given, OPENML_CACHE_ENV, "cache", "openml")


def refuse_inside_package(path: str | Path, what: str) -> Path:
    """``path`` resolved; UserError when it lies inside the installed package (which an
    upgrade replaces, and which may not be writable)."""
    target = Path(path).expanduser().resolve()
    package = package_folder()
    if target == package or package in target.parents:
        raise UserError(f"{what} {path} lies inside the installed tabpar package ({package}); "
                        f"give a folder of your own with --out.")
    return target
