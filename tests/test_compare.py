"""tabpar compare: statistics against SciPy and Holm's definition, known harm on real quick-suite
tasks, the leakage guard, and bad candidates."""
import json
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from tabpar.cli.main import main
from tabpar.evaluation.comparison import _task_delta, compare
from tabpar.evaluation.stats import holm, signed_rank_p
from tabpar.common.metrics import METRICS
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
    metric = METRICS["rmse"]
    naive = float(y.mean())
    delta, se_boot, se_seed, seed_df, _, _ = _task_delta(None, metric, y, naive, [[base]],
                                                         [[cand]], np.random.default_rng(1),
                                                         2000)
    scale = metric(y, np.full(500, naive)) - metric(y, base)
    assert delta == pytest.approx((metric(y, base) - metric(y, cand)) / scale)
    assert se_seed == 0.0 and seed_df is None  # one seed: no seed spread

    def paired_delta(yy, bb, cc):
        rmse = lambda a, b: np.sqrt(np.mean((a - b) ** 2))  # noqa: E731
        return (rmse(yy, bb) - rmse(yy, cc)) / scale

    # reference: scipy.stats.bootstrap, paired resampling of the rows, standard error
    res = stats.bootstrap((y, base, cand), paired_delta, paired=True, vectorized=False,
                          n_resamples=2000, random_state=2)
    assert se_boot == pytest.approx(res.standard_error, rel=0.12)


def test_aa_is_marked_and_stays_green(tmp_path):
    result = compare("builtin", suite="quick", tasks=["attrition", "credit_data"],
                     models=["rf"], seeds=2, out=tmp_path, workers=1)
    assert result.aa
    assert not result.regression
    rows = [json.loads(line) for line in open(tmp_path / "candidate" / "jobs.jsonl")]
    assert {r["seed"] for r in rows} == {1000, 1001}  # the documented A/A seed offset


def test_dropping_calendar_fields_is_worse_where_dates_carry_signal(tmp_path):
    variant = tmp_path / "no_calendar.toml"
    variant.write_text('[variant]\nname = "no-calendar"\ncalendar = false\n')
    result = compare(str(variant), suite="quick", tasks=["chicago", "diamonds"],
                     models=["lgbm"], seeds=1, out=tmp_path / "out")
    calls = {t.task: t.call for t in result.tasks}
    # chicago: daily riders depend on the weekday, which only the calendar fields carry
    assert calls["chicago"] == "worse"
    assert calls["diamonds"] == "same"  # no date column: identical features
    assert result.regression
    assert (tmp_path / "out" / "report.md").exists()
    report = json.loads((tmp_path / "out" / "report.json").read_text())
    assert {"tasks", "wins", "ties", "losses", "median_delta", "p_value",
            "regression"} <= set(report)


def test_codes_learned_on_holdout_rows_are_worse_and_flagged(tmp_path):
    result = compare("tp_candidates:codes_per_call", suite="quick", tasks=["hotel_rates"],
                     models=["lgbm"], seeds=1, out=tmp_path)
    assert result.tasks[0].call == "worse"
    assert result.leakage  # its output depends on the rows transformed together


def test_codes_from_all_rows_are_caught_by_the_leakage_guard(tmp_path, capsys):
    code = main(["compare", "--candidate", "tp_candidates:codes_from_all_rows", "--suite",
                 "quick", "--tasks", "hotel_rates", "--models", "lgbm", "--seeds", "1",
                 "--out", str(tmp_path)])
    out = capsys.readouterr().out
    assert code == 1  # the gate fails even if the scores looked better
    assert "leakage guard" in out and "learned from the holdout rows" in out


def test_failure_on_one_task_is_recorded_and_the_rest_go_on(tmp_path):
    result = compare("tp_candidates:fails_on_attrition", suite="quick",
                     tasks=["attrition", "credit_data"], models=["lgbm"], seeds=1,
                     out=tmp_path)
    calls = {t.task: t for t in result.tasks}
    assert calls["attrition"].call == "error"
    assert "synthetic failure" in calls["attrition"].note
    assert calls["credit_data"].call in ("same", "better", "worse")
    assert "attrition" in (tmp_path / "report.md").read_text()


@pytest.mark.parametrize("spec,words", [
    ("no_such_module_xyz:make", "Cannot import module"),
    ("tp_candidates:missing_function", "has no function"),
    ("tp_candidates:not_a_transformer", "not a transformer"),
    ("tp_candidates:text_output", "non-numeric"),
    ("tp_candidates:wrong_rows", "one row per input row"),
])
def test_bad_candidates_get_one_sentence(tmp_path, capsys, spec, words):
    code = main(["compare", "--candidate", spec, "--suite", "quick", "--tasks", "attrition",
                 "--models", "lgbm", "--seeds", "1", "--out", str(tmp_path)])
    captured = capsys.readouterr()
    text = captured.err + captured.out
    assert words in text
    assert "Traceback" not in text
    assert code in (1, 2)


def test_pytest_helper_raises_on_regression(tmp_path):
    variant = tmp_path / "no_calendar.toml"
    variant.write_text('[variant]\ncalendar = false\n')
    with pytest.raises(AssertionError, match="regression"):
        assert_no_regression(str(variant), suite="quick", tasks=["chicago"], models=["lgbm"],
                             seeds=1, out=tmp_path / "out")


def test_aa_trials_rarely_raise_a_regression(tmp_path):
    # six A/A trials with fresh candidate seeds against one baseline run; with a false-alarm
    # rate of 5%, two or more alarms in six trials happen 3% of the time (binomial), so this
    # fails only if the gate is clearly too eager (bench/compare_aa.py measures the rate)
    tasks = ["txhousing", "attrition", "credit_data"]
    first = compare("builtin", suite="quick", tasks=tasks, models=["rf"], seeds=2,
                    out=tmp_path / "t0", n_boot=300, workers=1)
    alarms = int(first.regression)
    for trial in range(1, 6):
        result = compare("builtin", baseline=str(tmp_path / "t0" / "baseline"), suite="quick",
                         tasks=tasks, models=["rf"], seeds=2, out=tmp_path / f"t{trial}",
                         n_boot=300, aa_seed_offset=1000 + 100 * trial, seed=trial,
                         workers=1)
        assert result.aa
        alarms += int(result.regression)
    assert alarms <= 1
