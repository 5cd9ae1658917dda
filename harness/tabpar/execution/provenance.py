"""Provenance of a result: the versions of everything that can change a score, and the digest
of the code that shapes prepared arrays."""
from __future__ import annotations

import hashlib
import platform
from functools import lru_cache
from importlib.metadata import PackageNotFoundError, packages_distributions, version
from pathlib import Path

# import name → the name a version is recorded under (kept stable across distributions: the
# xgboost import comes from the xgboost or the xgboost-cpu distribution)
RECORDED_LIBRARIES = {"numpy": "numpy", "pandas": "pandas", "sklearn": "scikit-learn",
                      "xgboost": "xgboost", "lightgbm": "lightgbm"}


def tabpar_version() -> str:
    """tabpar's installed version, or ``0+unknown`` in a checkout that was never installed."""
    try:
        return version("tabpar")
    except PackageNotFoundError:
        return "0+unknown"


@lru_cache(maxsize=1)
def _providers() -> dict:
    # scanning every installed distribution takes about half a second: once per process
    return packages_distributions()


@lru_cache(maxsize=None)
def import_package_version(import_name: str) -> str | None:
    """Version of the installed distribution that provides ``import_name``, read from package
    metadata (so the library itself is not imported); None when it is not installed."""
    recorded = RECORDED_LIBRARIES.get(import_name)
    if recorded is not None:
        try:  # the usual distribution: one lookup instead of a scan of every installed one
            return version(recorded)
        except PackageNotFoundError:
            pass
    for dist in _providers().get(import_name, []):
        try:
            return version(dist)
        except PackageNotFoundError:
            continue
    return None


def library_versions() -> dict:
    """Versions of everything that can change a score: Python, the numeric and model libraries
    (recorded by import package, whichever distribution installed it) and tabpar."""
    versions = {"python": platform.python_version()}
    versions.update({recorded: import_package_version(name)
                     for name, recorded in RECORDED_LIBRARIES.items()})
    versions["tabpar"] = tabpar_version()
    return versions


@lru_cache(maxsize=1)
def preparation_code_digest() -> str:
    """Hash of the code that shapes prepared arrays (every module of the data and procedure
    stages), so a change to loading, splitting or preparing invalidates the cache and marks
    reference jobs as not reusable."""
    import tabpar.data
    import tabpar.procedure

    digest = hashlib.sha256()
    for package in (tabpar.data, tabpar.procedure):
        root = Path(package.__file__).parent
        for path in sorted(root.rglob("*.py")):
            digest.update(path.relative_to(root.parent).as_posix().encode())
            digest.update(path.read_bytes())
    return digest.hexdigest()[:16]
