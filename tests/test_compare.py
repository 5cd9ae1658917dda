"""tabpar compare: statistics against SciPy and Holm's definition, known harm on real quick-suite
tasks, the leakage guard, and one cheap A/A run.

Most candidates run against the session's quick run (conftest.quick_run, lgbm seed 0) as the
baseline folder, so those tests run only the candidate's jobs; the default (a baseline procedure
run by compare itself) is exercised by the A/A and calendar tests and by
tests/test_cache_and_options.py. How often an A/A comparison raises a false alarm is measured by
bench/compare_aa.py, not here. Bad candidates (exit 2, one sentence) are cases of the bad-input
matrix (tests/test_bad_input.py)."""
import json
from pathlib import Path

import numpy as np
import pytest
from scipy import stats
from sklearn import metrics as skm
from tabpar.cli.main import main
from tabpar.common.metrics import METRICS
from tabpar.evaluation.comparison import _task_delta, compare
from tabpar.evaluation.stats import holm, signed_rank_p
from tabpar.testing import assert_no_regression

CANDIDATES = Path(__file__).parent / "candidates"


@pytest.fixture(autouse=True)
def candidates_importable(monkeypatch):
    monkeypatch.syspath_prepend(str(CANDIDATES))


def test_holm_matches_its_definition():
    # reference: Holm (1979), step-down: p_(i) * (m - i + 1), made monotone, capped at 1;
    # hand-computed for these four values
    p = [0.01, 0.04, 0.03, 0.005]
    assert np.allclose(holm(p), [0.03, 0.06, 0.06, 0.02])


def test_signed_rank_p_is_scipy_wilcoxon():
    deltas = np.array([-0.2, -0.1, -0.15, 0.01, -0.3, -0.05, -0.12])  # synthetic
    # reference: scipy.stats.wilcoxon, two-sided
    assert signed_rank_p(deltas, 0.0) == pytest.approx(stats.wilcoxon(deltas).pvalue)
    # deltas under the tolerance count as zero and are dropped
    assert signed_rank_p(deltas, 0.02) == pytest.approx(
        stats.wilcoxon(np.delete(deltas, 3)).pvalue)


def test_signed_rank_p_on_standardised_deltas_is_scipy_wilcoxon():
    deltas = np.array([-0.18, 0.002, -0.005, -0.0025, -0.016, 0.0003, -0.07, -0.02])  # synthetic
    se = np.array([0.2, 0.004, 0.005, 0.02, 0.012, 0.001, 0.15, 0.018])
    # reference: scipy.stats.wilcoxon on delta / se
    assert signed_rank_p(deltas, 0.0, se) == pytest.approx(stats.wilcoxon(deltas / se).pvalue)
    # a task without noise and no change counts as a zero (dropped), not as a NaN
    with_exact = signed_rank_p(np.append(deltas, 0.0), 0.0, np.append(se, 0.0))
    assert with_exact == pytest.approx(stats.wilcoxon(deltas / se).pvalue)


def test_task_delta_band_matches_scipy_bootstrap():
    rng = np.random.default_rng(0)
    y = rng.normal(10, 2, 500)  # synthetic holdout
    base = y + rng.normal(0, 1.0, 500)
    cand = y + rng.normal(0, 1.2, 500)
    naive = float(y.mean())
    delta, se_boot, se_seed, seed_df, _, _ = _task_delta(None, METRICS["rmse"], y, naive,
                                                         [[base]], [[cand]],
                                                         np.random.default_rng(1), 20_000)
    # the documented delta (module docstring of tabpar.evaluation.comparison): the candidate's
    # gain over the baseline as a share of the baseline's gain over the naive floor, with the
    # scores from sklearn.metrics.root_mean_squared_error (the reference metric)
    rmse = skm.root_mean_squared_error
    scale = rmse(y, np.full(500, naive)) - rmse(y, base)
    assert delta == pytest.approx((rmse(y, base) - rmse(y, cand)) / scale, rel=1e-12)
    assert se_seed == 0.0 and seed_df is None  # one seed: no seed spread

    def paired_delta(yy, bb, cc, axis=-1):
        def rmse_along(a, b):
            return np.sqrt(np.mean((a - b) ** 2, axis=axis))
        return (rmse_along(yy, bb) - rmse_along(yy, cc)) / scale

    # reference: scipy.stats.bootstrap, the same scheme (rows drawn with replacement, truth and
    # both predictions paired; the scale fixed from the full holdout), standard error
    res = stats.bootstrap((y, base, cand), paired_delta, paired=True, vectorized=True,
                          n_resamples=50_000, random_state=2)
    # Monte Carlo error of a bootstrap standard error from B resamples of a near-normal
    # statistic: relative sd 1/sqrt(2 (B - 1)), so 0.0050 at B = 20,000 (ours) and 0.0032 at
    # B = 50,000 (scipy's); their difference has relative sd 0.0059, and 0.025 is about four
    # of those (the old 2,000 resamples each allowed 0.12)
    assert se_boot == pytest.approx(res.standard_error, rel=0.025)


def test_aa_is_marked_and_stays_green(tmp_path):
    # the one A/A check kept here (bench/compare_aa.py measures the false-alarm rate over many
    # trials): random forests, where seeds matter, two seeds so the seed spread is in the band,
    # and the baseline run by compare itself
    result = compare("builtin", suite="quick", tasks=["attrition"], models=["rf"], seeds=2,
                     out=tmp_path, workers=1)
    assert result.aa
    assert not result.regression
    rows = [json.loads(line) for line in open(tmp_path / "candidate" / "jobs.jsonl")]
    assert {r["seed"] for r in rows} == {1000, 1001}  # the documented A/A seed offset
    base = [json.loads(line) for line in open(tmp_path / "baseline" / "jobs.jsonl")]
    assert {r["seed"] for r in base} == {0, 1}
    # other seeds, so other forests: the A/A run is not a copy of the baseline
    assert {r["score"] for r in rows}.isdisjoint({r["score"] for r in base})


def test_dropping_calendar_fields_is_worse_where_dates_carry_signal(tmp_path):
    variant = tmp_path / "no_calendar.toml"
    variant.write_text('[variant]\nname = "no-calendar"\ncalendar = false\n')
    # the baseline run by compare itself, both sides in this process with the same thread
    # count: on diamonds the two fits see identical features, so they agree (to the last bits)
    result = compare(str(variant), suite="quick", tasks=["chicago", "diamonds"],
                     models=["lgbm"], seeds=1, out=tmp_path / "out", workers=1)
    calls = {t.task: t.call for t in result.tasks}
    # chicago: daily riders depend on the weekday, which only the calendar fields carry
    assert calls["chicago"] == "worse"
    assert calls["diamonds"] == "same"  # no date column: identical features
    diamonds = next(t for t in result.tasks if t.task == "diamonds")
    assert abs(diamonds.delta) < 1e-12
    assert diamonds.candidate_score == pytest.approx(diamonds.baseline_score, rel=1e-12)
    assert result.regression
    assert (tmp_path / "out" / "report.md").exists()
    report = json.loads((tmp_path / "out" / "report.json").read_text())
    assert {"tasks", "wins", "ties", "losses", "median_delta", "p_value",
            "regression"} <= set(report)


def test_codes_learned_on_holdout_rows_are_worse_and_flagged(tmp_path, quick_run):
    result = compare("tp_candidates:codes_per_call", baseline=str(quick_run.out),
                     suite="quick", tasks=["hotel_rates"], models=["lgbm"], seeds=1,
                     out=tmp_path, workers=1)
    assert result.tasks[0].call == "worse"
    assert result.leakage  # its output depends on the rows transformed together


def test_codes_from_all_rows_are_caught_by_the_leakage_guard(tmp_path, capsys, quick_run):
    code = main(["compare", "--candidate", "tp_candidates:codes_from_all_rows", "--baseline",
                 str(quick_run.out), "--suite", "quick", "--tasks", "hotel_rates", "--models",
                 "lgbm", "--seeds", "1", "--workers", "1", "--out", str(tmp_path)])
    out = capsys.readouterr().out
    assert code == 1  # the gate fails even if the scores looked better
    assert "leakage guard" in out and "learned from the holdout rows" in out


def test_failure_on_one_task_is_recorded_and_the_rest_go_on(tmp_path, quick_run):
    result = compare("tp_candidates:fails_on_attrition", baseline=str(quick_run.out),
                     suite="quick", tasks=["attrition", "credit_data"], models=["lgbm"],
                     seeds=1, out=tmp_path, workers=1)
    calls = {t.task: t for t in result.tasks}
    assert calls["attrition"].call == "error"
    assert "synthetic failure" in calls["attrition"].note
    assert calls["credit_data"].call in ("same", "better", "worse")
    assert "attrition" in (tmp_path / "report.md").read_text()


def test_pytest_helper_raises_on_regression(tmp_path, quick_run):
    variant = tmp_path / "no_calendar.toml"
    variant.write_text('[variant]\ncalendar = false\n')
    with pytest.raises(AssertionError, match="regression"):
        assert_no_regression(str(variant), baseline=str(quick_run.out), suite="quick",
                             tasks=["chicago"], models=["lgbm"], seeds=1, out=tmp_path / "out",
                             workers=1)
