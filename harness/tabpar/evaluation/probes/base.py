"""What every probe shares: its answer (``Finding``), what it reads (``ProbeContext``), a
proposed correction (``Candidate``) and the paired test of that correction (``PairedTest``).

A probe either *proposes* corrected predictions (undo a transform, realign the rows, rescale),
which the runner scores on the same bootstrap resamples as the given predictions and the
reference's par model, or *examines* the predictions directly (labels instead of
probabilities, where the losses concentrate, a score too good to be true). Either way it
reports a ``Finding`` only when its evidence clears the paired bootstrap band.

All scores are in the task metric's units; "gain" is in the metric's direction (positive =
better, ``Metric.gain``), so no probe mixes "lower is better" with "higher is better".
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Callable

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.metrics import Metric
from tabpar.common.text import format_number as fmt
from tabpar.data.suites import Task

GAP_SHARE = 0.5  # "closes most of the gap to par": more than half of it


@dataclass
class Finding:
    """One probe's answer: ``evidence`` holds the figures (metric units unless the key says
    otherwise) and ``sentence`` says the mistake in plain words with them.

    ``strength`` orders findings (most decisive first): the evidence in units of its own 95%
    bootstrap half-width.
    """

    probe: str
    evidence: dict
    sentence: str
    strength: float = 0.0
    # True when the finding names a mechanism that explains the whole loss (a transform,
    # labels, ...); False for a symptom (a bias, a caution), beside which the "where it loses"
    # probe still asks where the losses fall
    mechanism: bool = True

    def to_dict(self) -> dict:
        return {"probe": self.probe, "evidence": self.evidence, "sentence": self.sentence}

    def __str__(self) -> str:
        return f"[{self.probe}] {self.sentence}"


@dataclass
class ProbeContext:
    """What the probes read: the holdout truth and every prediction set on the same rows.

    ``given`` and the ``reference`` sets (role → predictions; roles ``best``, ``par`` and
    ``naive``) are aligned to ``row_id``; ``ensembles`` holds every default ensemble's
    predictions (model → its lowest seed in the reference), the spread a probe compares the
    given predictions against (what separates reasonable models is no mistake). ``file_order`` holds, for each row of the user's file
    in the file's order, its position in ``row_id`` (None when unknown). ``features`` returns the
    holdout rows' feature columns aligned to ``row_id`` (None when unavailable); it is only
    called by the probes that need it.
    """

    task: Task
    metric: Metric
    y: np.ndarray
    given: np.ndarray
    row_id: np.ndarray
    reference: dict
    par: float  # par's score (mean over seeds of the median default ensemble)
    best: float
    best_model: str
    par_model: str
    ensemble_means: dict  # default ensemble → mean score over seeds
    reference_scores: list  # every reference run's score
    file_order: np.ndarray | None = None
    ensembles: dict = field(default_factory=dict)
    features: Callable[[], pd.DataFrame | None] = field(default=lambda: None, repr=False)
    # filled by the runner from its bootstrap: the given predictions against par and best
    score: float = float("nan")
    vs_par: tuple = (float("nan"), float("nan"))  # (gain over par, 95% half-width)
    vs_best: tuple = (float("nan"), float("nan"))

    @property
    def below_par(self) -> bool:
        """The given predictions are worse than par beyond the paired noise (the verdict's
        band)."""
        gain, width = self.vs_par
        return gain + width < 0

    @property
    def above_best(self) -> bool:
        gain, width = self.vs_best
        return gain - width > 0

    def figures(self) -> str:
        """``yours X, par Y (MODEL)``: the figures every sentence quotes."""
        return f"yours {fmt(self.score)}, par {fmt(self.par)} ({self.par_model})"


@dataclass
class Candidate:
    """A correction a probe proposes: the corrected predictions and how to judge them."""

    probe: str
    label: str  # what was done, e.g. "expm1" or "shifted by 1 row"
    prediction: np.ndarray
    judge: Callable  # judge(ctx, candidate, test) -> Finding | None
    info: dict = field(default_factory=dict)
    # par's predictions given the same kind of correction (fitted to par's own rows), when the
    # correction could improve any predictions a little (a fitted factor): the test then asks
    # how much more it helps the given predictions than it helps the reference's
    par_corrected: np.ndarray | None = None
    reference_gain: float = 0.0  # the most any default ensemble gains from its own correction


@dataclass
class PairedTest:
    """A candidate scored on the runner's bootstrap resamples (paired with the given
    predictions and with par)."""

    score: float
    gain: float  # over the given predictions (metric direction, positive = better)
    gain_width: float  # 95% half-width of that paired difference
    vs_par: float  # gain over par's score
    vs_par_width: float
    # what the same correction gains the reference: the most any default ensemble gains (0
    # without ``par_corrected``)
    par_gain: float = 0.0
    excess_width: float = float("nan")  # 95% half-width of gain − par_gain (paired)

    @property
    def improves(self) -> bool:
        """Better than the given predictions beyond the paired noise, and (when par was
        corrected alike) by more than the correction improves par, beyond the noise."""
        if not np.isnan(self.excess_width):
            return self.gain - self.par_gain - self.excess_width > 0
        return self.gain - self.gain_width > 0

    @property
    def reaches_par(self) -> bool:
        """Not worse than par beyond the paired noise."""
        return self.vs_par + self.vs_par_width >= 0

    def gap_closed(self, ctx: ProbeContext) -> float:
        """Share of the given predictions' gap to par that the candidate closes (1 = all)."""
        gap = -ctx.vs_par[0]
        return float((self.gain - self.par_gain) / gap) if gap > 0 else 0.0


def best_by_score(ctx: ProbeContext, options: dict) -> tuple[str, np.ndarray] | None:
    """The option (label → predictions) with the best point score, or None when none scores
    (e.g. values a metric refuses). Scoring a few options here keeps the bootstrap to one
    candidate per probe."""
    scored = []
    for label, prediction in options.items():
        try:
            with np.errstate(all="ignore"):
                value = ctx.metric(ctx.y, prediction)
        except (ValueError, UserError):  # a metric refusing these values (RMSLE < 0)
            continue
        if np.isfinite(value):
            scored.append((value, label))
    if not scored:
        return None
    sign = 1 if ctx.metric.lower_is_better else -1
    _, label = min(scored, key=lambda s: sign * s[0])
    return label, options[label]
