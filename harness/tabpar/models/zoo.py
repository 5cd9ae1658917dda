"""The model zoo: every model at its library's defaults except the seed and the thread count.

Two deliberate deviations, both for the linear model: features are standardised first (the
procedure's codes and raw magnitudes differ by orders of magnitude), and LogisticRegression gets
``max_iter=1000`` because its default of 100 stops before convergence on several suite tasks, and
a model that has not converged is no baseline.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from tabpar.common.errors import UserError

DEFAULT_ENSEMBLES = ("rf", "et", "hgb", "xgb", "lgbm")


@dataclass(frozen=True)
class ModelSpec:
    name: str
    description: str
    build: Callable  # (task_type, seed, threads) -> unfitted estimator
    seeded: bool  # whether the seed can change its fit (for reproducibility checks)
    # fit seconds per million training cells (rows × features) at one thread, regression and
    # classification: medians over the default reference's jobs (2026, 2 cores); used to start
    # the longest jobs first and to estimate a job's time against a budget
    costs: tuple
    library: str = "sklearn.ensemble"  # the module its fit runs in (imported before the job)

    def cost(self, task_type: str) -> float:
        """Rough fit seconds per million training cells for ``task_type`` (one thread)."""
        return self.costs[0] if task_type == "regression" else self.costs[1]


def _naive(task_type, seed, threads):
    from sklearn.dummy import DummyClassifier, DummyRegressor

    if task_type == "regression":
        return DummyRegressor(strategy="mean")
    return DummyClassifier(strategy="prior")


def _linear(task_type, seed, threads):
    from sklearn.linear_model import LogisticRegression, Ridge
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    if task_type == "regression":
        return make_pipeline(StandardScaler(), Ridge())
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000, random_state=seed))


def _rf(task_type, seed, threads):
    from sklearn.ensemble import RandomForestClassifier, RandomForestRegressor

    cls = RandomForestRegressor if task_type == "regression" else RandomForestClassifier
    return cls(random_state=seed, n_jobs=threads)


def _et(task_type, seed, threads):
    from sklearn.ensemble import ExtraTreesClassifier, ExtraTreesRegressor

    cls = ExtraTreesRegressor if task_type == "regression" else ExtraTreesClassifier
    return cls(random_state=seed, n_jobs=threads)


def _hgb(task_type, seed, threads):
    # threads: set by the runner through threadpoolctl (HGB has no n_jobs parameter)
    from sklearn.ensemble import (
        HistGradientBoostingClassifier,
        HistGradientBoostingRegressor,
    )

    cls = (HistGradientBoostingRegressor if task_type == "regression"
           else HistGradientBoostingClassifier)
    return cls(random_state=seed)


def _xgb(task_type, seed, threads):
    import xgboost

    cls = xgboost.XGBRegressor if task_type == "regression" else xgboost.XGBClassifier
    return cls(random_state=seed, n_jobs=threads)


def _lgbm(task_type, seed, threads):
    import lightgbm

    cls = lightgbm.LGBMRegressor if task_type == "regression" else lightgbm.LGBMClassifier
    # verbose=-1 only silences its log lines; it does not change the model
    return cls(random_state=seed, n_jobs=threads, verbose=-1)


MODELS: dict[str, ModelSpec] = {
    m.name: m
    for m in [
        ModelSpec("naive", "mean / class prior (the floor)", _naive, False, (0.005, 0.012)),
        ModelSpec("linear", "ridge / logistic regression on standardised features", _linear,
                  False, (0.06, 0.16)),
        ModelSpec("rf", "random forest (scikit-learn)", _rf, True, (32.0, 9.7)),
        ModelSpec("et", "extra trees (scikit-learn)", _et, True, (15.7, 7.4)),
        ModelSpec("hgb", "histogram gradient boosting (scikit-learn)", _hgb, True, (2.2, 4.3)),
        ModelSpec("xgb", "XGBoost", _xgb, True, (1.5, 3.6), library="xgboost"),
        ModelSpec("lgbm", "LightGBM", _lgbm, True, (0.8, 3.4), library="lightgbm"),
    ]
}


def check_models(names) -> list[str]:
    """The named models in zoo order (all when ``names`` is empty); UserError for unknown ones."""
    if not names:
        return list(MODELS)
    unknown = [n for n in names if n not in MODELS]
    if unknown:
        raise UserError(f"Unknown model '{unknown[0]}'; the zoo has {', '.join(MODELS)}.")
    return [n for n in MODELS if n in names]


def build_model(name: str, task_type: str, seed: int, threads: int = 1):
    """An unfitted estimator for ``task_type`` ('regression', 'binary', 'multiclass')."""
    return MODELS[name].build(task_type, seed, threads)
