"""tabpar.common.metrics against scikit-learn's metrics, on seeded synthetic data.

All targets and predictions here are synthetic stand-ins drawn from a seeded generator.
"""
from __future__ import annotations

import numpy as np
import pytest
from sklearn import metrics as skm
from tabpar.common.errors import UserError
from tabpar.common.metrics import METRICS, get_metric

N = 400


@pytest.fixture
def regression():
    """Synthetic non-negative targets (price-like) and noisy non-negative predictions."""
    rng = np.random.default_rng(20240601)
    y = rng.gamma(shape=2.0, scale=50.0, size=N)
    p = np.clip(y + rng.normal(0.0, 25.0, size=N), 0.0, None)
    return y, p


@pytest.fixture
def binary():
    """Synthetic 0/1 labels and probabilities of class 1 that carry some signal."""
    rng = np.random.default_rng(7)
    y = rng.integers(0, 2, size=N)
    p = np.clip(0.35 * y + rng.uniform(0.0, 0.65, size=N), 0.001, 0.999)
    return y, p


@pytest.fixture
def multiclass():
    """Synthetic labels 0..3 and an (n, 4) probability matrix whose rows sum to 1."""
    rng = np.random.default_rng(11)
    k = 4
    y = rng.integers(0, k, size=N)
    alpha = np.ones((N, k))
    alpha[np.arange(N), y] += 2.0  # some signal toward the true class
    p = np.vstack([rng.dirichlet(a) for a in alpha])
    return y, p


# --- regression ---------------------------------------------------------------------------

def test_rmse(regression):
    y, p = regression
    # reference: sklearn.metrics.root_mean_squared_error
    assert METRICS["rmse"](y, p) == pytest.approx(skm.root_mean_squared_error(y, p), rel=1e-12)


def test_rmsle_is_rmse_of_log1p(regression):
    y, p = regression
    got = METRICS["rmsle"](y, p)
    # reference: sklearn.metrics.root_mean_squared_log_error
    assert got == pytest.approx(skm.root_mean_squared_log_error(y, p), rel=1e-12)
    # reference: sklearn.metrics.root_mean_squared_error on numpy.log1p values (RMSLE's definition)
    assert got == pytest.approx(skm.root_mean_squared_error(np.log1p(y), np.log1p(p)), rel=1e-12)


def test_rmsle_refuses_negative_values(regression):
    y, p = regression
    p = p.copy()
    p[3] = -1.0
    # reference: sklearn.metrics.root_mean_squared_log_error also refuses negative values
    with pytest.raises(ValueError):
        skm.root_mean_squared_log_error(y, p)
    with pytest.raises(UserError):
        METRICS["rmsle"](y, p)


def test_mae(regression):
    y, p = regression
    # reference: sklearn.metrics.mean_absolute_error
    assert METRICS["mae"](y, p) == pytest.approx(skm.mean_absolute_error(y, p), rel=1e-12)


def test_r2(regression):
    y, p = regression
    # reference: sklearn.metrics.r2_score
    assert METRICS["r2"](y, p) == pytest.approx(skm.r2_score(y, p), rel=1e-12)


@pytest.mark.parametrize("prediction", [[3.0, 3.0, 3.0, 3.0], [1.0, 2.0, 3.0, 4.0]])
def test_r2_constant_target(prediction):
    y = np.full(4, 3.0)  # synthetic constant target
    # reference: sklearn.metrics.r2_score (force_finite=True: 1.0 if perfect, else 0.0)
    assert METRICS["r2"](y, prediction) == skm.r2_score(y, prediction)


# --- classification -----------------------------------------------------------------------

def test_binary_accuracy(binary):
    y, p = binary
    labels = np.column_stack([1 - p, p]).argmax(axis=1)  # the class a classifier would predict
    # reference: sklearn.metrics.accuracy_score on the most probable class
    assert METRICS["accuracy"](y, p) == pytest.approx(skm.accuracy_score(y, labels), abs=1e-15)


def test_multiclass_accuracy(multiclass):
    y, p = multiclass
    # reference: sklearn.metrics.accuracy_score on the most probable class
    assert METRICS["accuracy"](y, p) == pytest.approx(skm.accuracy_score(y, p.argmax(axis=1)),
                                                      abs=1e-15)


def test_binary_log_loss(binary):
    y, p = binary
    # reference: sklearn.metrics.log_loss (probability of class 1 given as a vector)
    assert METRICS["log_loss"](y, p) == pytest.approx(skm.log_loss(y, p), rel=1e-12)


def test_multiclass_log_loss(multiclass):
    y, p = multiclass
    # reference: sklearn.metrics.log_loss with the class order given explicitly
    assert METRICS["log_loss"](y, p) == pytest.approx(
        skm.log_loss(y, p, labels=list(range(p.shape[1]))), rel=1e-12)


def test_log_loss_with_exact_zero_and_one_probabilities():
    # synthetic: hard 0/1 probabilities as a random forest often predicts, two of them wrong
    y = np.array([0, 1, 1, 0, 1, 0])
    p = np.array([0.0, 1.0, 0.0, 0.2, 0.9, 1.0])
    # reference: sklearn.metrics.log_loss (clips to [eps, 1 - eps], eps = machine epsilon)
    assert METRICS["log_loss"](y, p) == pytest.approx(skm.log_loss(y, p), rel=1e-9)


def test_binary_roc_auc(binary):
    y, p = binary
    # reference: sklearn.metrics.roc_auc_score
    assert METRICS["roc_auc"](y, p) == pytest.approx(skm.roc_auc_score(y, p), rel=1e-12)


def test_binary_roc_auc_with_ties():
    rng = np.random.default_rng(3)
    y = rng.integers(0, 2, size=N)  # synthetic labels
    score = np.round(0.4 * y + rng.uniform(0.0, 0.6, size=N), 1)  # few distinct values: ties
    assert len(np.unique(score)) < 15
    # reference: sklearn.metrics.roc_auc_score (a tied positive/negative pair counts one half)
    assert METRICS["roc_auc"](y, score) == pytest.approx(skm.roc_auc_score(y, score), rel=1e-12)


def test_binary_roc_auc_all_scores_tied():
    y = np.array([0, 1, 0, 1, 1, 0, 0])  # synthetic labels
    score = np.full(len(y), 0.3)
    # reference: sklearn.metrics.roc_auc_score (0.5 when every score is tied)
    assert METRICS["roc_auc"](y, score) == pytest.approx(skm.roc_auc_score(y, score))


def test_multiclass_roc_auc_ovr_macro(multiclass):
    y, p = multiclass
    # reference: sklearn.metrics.roc_auc_score(multi_class="ovr", average="macro")
    expected = skm.roc_auc_score(y, p, multi_class="ovr", average="macro")
    assert METRICS["roc_auc"](y, p) == pytest.approx(expected, rel=1e-12)


def test_multiclass_roc_auc_ovr_macro_with_ties():
    rng = np.random.default_rng(5)
    k = 3
    palette = rng.dirichlet(np.ones(k), size=6)  # 6 distinct probability rows → many ties
    y = rng.integers(0, k, size=N)  # synthetic labels
    p = palette[rng.integers(0, len(palette), size=N)]
    # reference: sklearn.metrics.roc_auc_score(multi_class="ovr", average="macro")
    expected = skm.roc_auc_score(y, p, multi_class="ovr", average="macro")
    assert METRICS["roc_auc"](y, p) == pytest.approx(expected, rel=1e-12)


# --- directions ---------------------------------------------------------------------------

# scikit-learn names a scorer "neg_..." when the metric is a loss (lower is better) and negates it
SKLEARN_SCORER = {"rmse": "neg_root_mean_squared_error",
                  "rmsle": "neg_root_mean_squared_log_error",
                  "mae": "neg_mean_absolute_error",
                  "r2": "r2",
                  "accuracy": "accuracy",
                  "log_loss": "neg_log_loss",
                  "roc_auc": "roc_auc"}


def test_every_metric_has_a_known_direction():
    assert set(METRICS) == set(SKLEARN_SCORER)


@pytest.mark.parametrize("name", sorted(SKLEARN_SCORER))
def test_lower_is_better_matches_sklearn_scorer_sign(name):
    scorer = SKLEARN_SCORER[name]
    # reference: sklearn.metrics.get_scorer_names ("neg_" prefix = a loss, lower is better)
    assert scorer in skm.get_scorer_names()
    assert METRICS[name].lower_is_better is scorer.startswith("neg_")
    assert get_metric(name).lower_is_better is scorer.startswith("neg_")  # the public lookup


@pytest.mark.parametrize("name", sorted(SKLEARN_SCORER))
def test_better_and_gain_follow_the_sklearn_scorer(name):
    # reference: a scikit-learn scorer is "greater is better" by construction: it returns the
    # metric, or minus the metric for a "neg_" one; so "a is better than b" is scorer(a) >
    # scorer(b), and tabpar's gain(a, b) is scorer(a) - scorer(b)
    sign = -1.0 if SKLEARN_SCORER[name].startswith("neg_") else 1.0
    metric = METRICS[name]
    for a, b in [(0.1, 0.9), (0.9, 0.1), (0.4, 0.4), (2.5, 0.75)]:
        assert metric.better(a, b) is (sign * a > sign * b), (a, b)
        assert metric.gain(a, b) == pytest.approx(sign * a - sign * b, abs=1e-15), (a, b)
