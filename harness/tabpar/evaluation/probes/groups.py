"""Where the predictions lose: the per-row loss difference against par's predictions, grouped
by each feature column.

A mistake confined to one column (category codes learned separately on the holdout rows, a
date parsed with day and month swapped) makes the losses concentrate in some of that column's
groups: levels of a category column, quantile bins of a numeric or date column, and for a date
also its month, its day of month and whether the day is 1 to 12 (the days a day-first reading
swaps with the month). For each grouping the share of the per-row differences'
variance it explains is measured bias-corrected (epsilon squared, so many small groups do not
explain by chance) on the ranks of the per-row differences (so a few huge squared errors do
not decide it), once for the user against par and once for each other default ensemble of
the reference against par (taking the largest: what separates two reasonable models is no
mistake): a finding when the best-explaining column's excess over the reference clears the
paired bootstrap band widened for the number of groupings tried (Bonferroni: the excess over its
bootstrap standard error beyond the normal quantile of 1 − 0.025 / groupings, since the column
is the best of many), and the score is below par beyond the noise.

Per-row losses add up to the metric: squared errors (of ``log1p`` values for RMSLE), absolute
errors, ``-log p`` of the true class, 0/1 errors, and for ROC AUC each row's share of the
wrongly ordered positive-negative pairs it takes part in.
"""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.text import format_number as fmt
from tabpar.evaluation.probes.base import Finding
from tabpar.evaluation.stats import bootstrap_scores, half_width

PROBE = "where-it-loses"
N_BINS = 10  # quantile bins of a numeric or date column
MIN_GROUP_ROWS = 10  # rarer levels are pooled into one group


MIN_EXPLAINED = 0.05  # share of the ranked per-row differences a column's groups must explain


def row_losses(metric_name: str, y, p) -> np.ndarray:
    """Each holdout row's loss under ``metric_name`` (bigger = worse), in units whose mean is
    the metric's loss (squared units for RMSE/RMSLE/R², 1 − AUC for ROC AUC).

    Examples
    --------
    >>> row_losses("mae", [1.0, 2.0], [1.5, 2.0]).tolist()
    [0.5, 0.0]
    """
    y = np.asarray(y, float)
    p = np.asarray(p, float)
    if metric_name in ("rmse", "r2"):
        return (y - p) ** 2
    if metric_name == "rmsle":
        return (np.log1p(y) - np.log1p(np.clip(p, 0, None))) ** 2
    if metric_name == "mae":
        return np.abs(y - p)
    if metric_name == "log_loss":
        q = p if p.ndim == 2 else np.column_stack([1 - p, p])
        return -np.log(np.clip(q[np.arange(len(y)), y.astype(int)], 1e-15, 1))
    if metric_name == "accuracy":
        labels = p.argmax(axis=1) if p.ndim == 2 else (p > 0.5).astype(int)
        return (labels != y).astype(float)
    if metric_name == "roc_auc" and p.ndim == 1:
        return _auc_losses(y.astype(bool), p)
    raise ValueError(f"no per-row loss for {metric_name} on predictions of shape {p.shape}")


def _auc_losses(positive, score) -> np.ndarray:
    """Per row: the share of the other class's rows ordered wrongly against it (ties half).
    The mean over positives and the mean over negatives both equal 1 − AUC."""
    pos, neg = np.sort(score[positive]), np.sort(score[~positive])
    out = np.empty(len(score))
    s = score[positive]
    out[positive] = ((len(neg) - np.searchsorted(neg, s, "right"))
                     + 0.5 * (np.searchsorted(neg, s, "right") - np.searchsorted(neg, s, "left"))
                     ) / max(len(neg), 1)
    s = score[~positive]
    out[~positive] = (np.searchsorted(pos, s, "left")
                      + 0.5 * (np.searchsorted(pos, s, "right") - np.searchsorted(pos, s, "left"))
                      ) / max(len(pos), 1)
    return out


def _codes(values: pd.Series) -> np.ndarray:
    """Group codes of one column: levels, or quantile bins when numeric with many values;
    missing values form their own group, rare levels are pooled."""
    import pandas as pd
    if pd.api.types.is_datetime64_any_dtype(values):
        values = pd.Series(values.to_numpy(dtype="datetime64[ns]").astype("int64"),
                           index=values.index).where(values.notna())
    if pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values) \
            and values.nunique() > N_BINS:
        codes = pd.qcut(values.rank(method="first"), N_BINS, labels=False)
        codes = codes.fillna(-1).to_numpy()
    else:
        codes = pd.factorize(values.astype(str).where(values.notna(), "\0missing"))[0]
    codes = np.unique(codes, return_inverse=True)[1]
    counts = np.bincount(codes)
    rare = counts[codes] < MIN_GROUP_ROWS
    codes = np.where(rare, len(counts), codes)
    return np.unique(codes, return_inverse=True)[1]


def groupings(features: pd.DataFrame) -> dict:
    """Name → group codes of every way the probe groups the rows."""
    import pandas as pd
    out = {}
    for column in features.columns:
        values = features[column]
        out[str(column)] = _codes(values)
        if pd.api.types.is_datetime64_any_dtype(values):
            out[f"{column} (month)"] = _codes(values.dt.month.astype("Int64").astype(str))
            out[f"{column} (day of month)"] = _codes(values.dt.day.astype("Int64").astype(str))
            # the days a day-first reading swaps with the month: 1 to 12
            out[f"{column} (day 1-12 or later)"] = _codes(
                (values.dt.day <= 12).astype(str).where(values.notna()))
    return {name: codes for name, codes in out.items() if codes.max() > 0}


def explained(codes, d, weights=None) -> float:
    """Epsilon squared: the bias-corrected share of the (weighted) variance of ``d`` that the
    groups ``codes`` explain (0 = none beyond chance, 1 = all); 0 for a constant ``d``.

    Examples
    --------
    >>> explained(np.array([0, 0, 1, 1]), np.array([0.0, 0.0, 1.0, 1.0]))
    1.0
    """
    d = np.asarray(d, float)
    w = np.ones(len(d)) if weights is None else np.asarray(weights, float)
    n = w.sum()
    mean = (w * d).sum() / n
    total = (w * (d - mean) ** 2).sum()
    size = np.bincount(codes, weights=w)
    sums = np.bincount(codes, weights=w * d)
    present = size > 0
    k = int(present.sum())
    if total <= 0 or k < 2 or n <= k:
        return 0.0
    between = (sums[present] ** 2 / size[present]).sum() - n * mean ** 2
    within = (total - between) / (n - k)
    return float((between - (k - 1) * within) / total)


def examine(ctx, n_boot: int = 500) -> list[Finding]:
    from scipy import stats
    if not ctx.below_par or ctx.metric.name not in ("rmse", "rmsle", "mae", "r2", "log_loss",
                                                    "accuracy", "roc_auc"):
        return []
    if np.ndim(ctx.given) == 1 and ctx.metric.name == "roc_auc" and len(np.unique(ctx.y)) < 2:
        return []
    features = ctx.features()
    if features is None or features.empty:
        return []
    name = ctx.metric.name
    par = ctx.reference["par"]
    # ranks of the per-row differences: a few rows with huge squared errors would otherwise
    # decide which grouping "explains" them
    d_user = _ranks(row_losses(name, ctx.y, ctx.given) - row_losses(name, ctx.y, par))
    base = row_losses(name, ctx.y, par)
    others = {m: p for m, p in ctx.ensembles.items() if m != ctx.par_model}
    others = others or {ctx.best_model: ctx.reference["best"]}
    d_refs = {m: _ranks(row_losses(name, ctx.y, p) - base) for m, p in others.items()}
    groups = groupings(features)
    if not groups:
        return []
    excess, pair = {}, {}
    for g, c in groups.items():
        shares = {m: explained(c, d) for m, d in d_refs.items()}
        pair[g] = max(shares, key=shares.get)
        excess[g] = explained(c, d_user) - shares[pair[g]]
    column = max(excess, key=excess.get)
    codes, model = groups[column], pair[column]
    d_ref = d_refs[model]
    # one bootstrap over rows of both explained shares, paired; the rows' codes stand in for y
    boot = bootstrap_scores(lambda c, d, w: explained(c, d, w), codes, [d_user, d_ref],
                            n_boot=n_boot)
    spread = boot[:, 0] - boot[:, 1]
    width = half_width(spread)
    se = float(np.std(spread[np.isfinite(spread)], ddof=1))
    needed = float(stats.norm.ppf(1 - 0.025 / len(groups)))  # two-sided 95%, Bonferroni
    z = excess[column] / se if se > 0 else float("inf")
    user_share, ref_share = explained(codes, d_user), explained(codes, d_ref)
    # on a large holdout a grouping explaining 1% is "significant" but explains little of the
    # gap: a finding must also be large enough to be the mistake's main trace
    if not z > needed or user_share < MIN_EXPLAINED:
        return []
    worst = _worst_group(features, column, codes, d_user)
    sentence = (f"Your predictions lose to par ({ctx.par_model}) mostly along '{column}': its "
                f"groups explain {user_share:.0%} of the (ranked) per-row loss differences, "
                f"against {max(ref_share, 0):.0%} between two reference models ({model} and "
                f"{ctx.par_model}); worst {worst} ({ctx.figures()}). Check how this column "
                f"reaches your model: {_suspects(features[column.split(' (')[0]])}.")
    return [Finding(PROBE, {"column": column, "explained": user_share,
                            "explained_reference": ref_share, "reference_model": model,
                            "excess": excess[column],
                            "noise": width, "z": z, "z_needed": needed,
                            "groupings": len(groups), "worst_group": worst, "score": ctx.score,
                            "par": ctx.par}, sentence,
                    strength=z / needed)]


def _suspects(values: pd.Series) -> str:
    """The usual mistakes for a column of this kind."""
    import pandas as pd
    if pd.api.types.is_datetime64_any_dtype(values):
        return ("a date parsed differently from the training rows (day and month swapped by a "
                "day-first reading?) or its calendar fields computed differently")
    if pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values):
        return "a number parsed, scaled or filled differently from the training rows"
    return ("category codes learned separately on the holdout rows, or levels spelled "
            "differently from the training rows")


def _ranks(d) -> np.ndarray:
    """Ranks scaled to 0..1 (ties share their mean rank)."""
    from scipy import stats
    return (stats.rankdata(d) - 1) / max(len(d) - 1, 1)


def _worst_group(features, column, codes, d) -> str:
    """The group losing most per row, in words."""
    import pandas as pd
    size = np.bincount(codes)
    mean = np.bincount(codes, weights=d) / np.maximum(size, 1)
    g = int(np.argmax(mean))
    base = column.split(" (")[0]
    values = features[base][codes == g]
    if column.endswith("(month)"):
        values = "month " + values.dt.month.astype(str)
    elif column.endswith("(day of month)"):
        values = "day " + values.dt.day.astype(str)
    elif column.endswith("(day 1-12 or later)"):
        values = np.where(values.dt.day <= 12, "days 1-12", "days 13-31")
        values = pd.Series(values)
    if pd.api.types.is_numeric_dtype(values) and values.nunique() > 1:
        what = f"{fmt(values.min())} to {fmt(values.max())}"
    elif pd.api.types.is_datetime64_any_dtype(values) and column == base:
        what = f"{values.min():%Y-%m-%d} to {values.max():%Y-%m-%d}"
    else:
        shown = values.astype(str).unique()[:3]
        what = ", ".join(shown) + ("…" if values.nunique() > 3 else "")
    return f"group {what} ({int(size[g]):,} rows)"
