"""Hostile values and faults (issue 17, classes 2, 3, 6, 7, 8): each case failed before the
fix and holds now.

``REFUSED`` is the table of inputs that must be refused with one sentence (exit 2, no
traceback, the named words in the message, no results folder written); the tests after it
check the cases that are not a refusal (a run that must not reuse old jobs, a score that must
not be recorded as Infinity, a command that must stop with exit 130, candidate code that must
not touch tabpar's stdout or import path).

Every data file is a SYNTHETIC stand-in generated here (columns x1, x2, when, y); none is real
data.
"""
from __future__ import annotations

import importlib.machinery
import json
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
import pytest
from tabpar.cli.main import main

CANDIDATES = Path(__file__).parent / "candidates"
N_ROWS = 120


def synthetic_frame(n: int = N_ROWS) -> pd.DataFrame:
    """SYNTHETIC: two features, a daily ISO date, a numeric target."""
    rng = np.random.default_rng(1)
    x1 = rng.normal(size=n).round(4)
    x2 = rng.integers(0, 5, n)
    return pd.DataFrame({"x1": x1, "x2": x2,
                         "when": pd.date_range("2020-01-01", periods=n, freq="D")
                         .strftime("%Y-%m-%d"),
                         "y": (3 * x1 + x2 + rng.normal(size=n)).round(4)})


def write_suite(folder: Path, data: pd.DataFrame | None = None, **fields) -> Path:
    """A one-task suite over ``d.csv``; ``fields`` are raw TOML values (None removes one)."""
    (data if data is not None else synthetic_frame()).to_csv(folder / "d.csv", index=False)
    task = {"name": '"t"', "source": '"csv:d.csv"', "target": '"y"', "type": '"regression"',
            "metric": '"rmse"', "drop": '["when"]', **fields}
    lines = ["[suite]", 'name = "hostile"', "", "[[task]]"]
    lines += [f"{k} = {v}" for k, v in task.items() if v is not None]
    path = folder / "s.toml"
    path.write_text("\n".join(lines) + "\n")
    return path


def run_args(tmp: Path, suite: Path, *extra) -> list:
    return ["run", "--suite", str(suite), "--models", "naive", "--seeds", "1", "--workers", "1",
            "--out", str(tmp / "out"), *extra]


@dataclass
class Refusal:
    id: str
    build: Callable[[Path], list]  # tmp folder -> argv after "tabpar"
    named: tuple  # words the one-line message must contain


REFUSED = [
    # class 2: suite values and options that reached the code unchecked
    Refusal("2-negative-sample-seed",
            lambda t: run_args(t, write_suite(t, max_rows=100, sample_seed=-1)),
            ("sample_seed", "-1")),
    Refusal("2-cutoff-with-utc-offset-text",
            lambda t: run_args(t, write_suite(t, drop="[]", holdout='{ policy = "time", date = '
                                              '"when", cutoff = "2020-03-01T00:00:00+02:00" }',
                                              dates='["when"]')),
            ("cutoff", "offset")),
    Refusal("2-cutoff-with-utc-offset-toml-datetime",
            lambda t: run_args(t, write_suite(t, drop="[]", holdout='{ policy = "time", date = '
                                              '"when", cutoff = 2020-03-01T00:00:00Z }',
                                              dates='["when"]')),
            ("cutoff", "offset")),
    Refusal("2-ordinal-level-is-a-list",
            lambda t: run_args(t, write_suite(t, ordinal="{ x2 = [[0, 1], [2, 3, 4]] }")),
            ("ordinal", "x2")),
    Refusal("2-ordinal-level-repeated",
            lambda t: run_args(t, write_suite(t, ordinal="{ x2 = [0, 1, 1, 2, 3, 4] }")),
            ("ordinal", "x2", "twice")),
    Refusal("2-holdout-date-is-a-list",
            lambda t: run_args(t, write_suite(t, holdout='{ policy = "time", date = ["when"] }')),
            ("'date'", "column name")),
    Refusal("2-holdout-date-is-a-number",
            lambda t: run_args(t, write_suite(t, holdout='{ policy = "time", date = 3 }')),
            ("'date'", "column name")),
    Refusal("2-job-timeout-infinite",
            lambda t: run_args(t, write_suite(t), "--job-timeout", "inf"),
            ("--job-timeout", "inf")),
    Refusal("2-seeds-beyond-any-seed",
            lambda t: run_args(t, write_suite(t))[:-4] + ["--seeds", "5000000000",
                                                           "--out", str(t / "out")],
            ("--seeds", "5000000000")),
    # class 3: inputs that gave silently wrong results
    Refusal("3-unix-seconds-listed-as-dates",
            lambda t: run_args(t, write_suite(t, synthetic_frame().assign(
                when=lambda f: 1_577_836_800 + 86_400 * np.arange(len(f))),
                drop="[]", dates='["when"]')),
            ("'when'", "numbers", "ISO 8601")),
    Refusal("3-target-listed-as-a-date",
            lambda t: run_args(t, write_suite(t, dates='["y"]')),
            ("'y'", "dates")),
    Refusal("3-compare-tolerance-nan",
            lambda t: ["compare", "--candidate", "builtin", "--suite", str(write_suite(t)),
                       "--tolerance", "nan", "--out", str(t / "out")],
            ("--tolerance", "nan")),
    # class 8: misleading messages or silently ignored values
    Refusal("8-place-tolerance-negative",
            lambda t: ["place", "hotel_rates", "--score", "40", "--tolerance", "-5"],
            ("--tolerance", "-5")),
    Refusal("8-place-tolerance-nan",
            lambda t: ["place", "hotel_rates", "--score", "40", "--tolerance", "nan"],
            ("--tolerance", "nan")),
    Refusal("8-ordinal-column-unknown",
            lambda t: run_args(t, write_suite(t, ordinal='{ grade = ["low", "high"] }')),
            ("ordinal", "'grade'")),
    Refusal("8-assembled-date-overwrites-a-feature",
            lambda t: run_args(t, write_suite(t, synthetic_frame().assign(
                yr=2020, mo=lambda f: 1 + np.arange(len(f)) % 12),
                assemble_date='{ name = "x1", year = "yr", month = "mo" }')),
            ("'x1'", "another name")),
    Refusal("8-all-missing-assembled-date",
            lambda t: run_args(t, write_suite(t, synthetic_frame().assign(yr=2020, mo=13),
                                              assemble_date='{ name = "sold", year = "yr", '
                                                            'month = "mo" }',
                                              holdout='{ policy = "time", date = "sold" }')),
            ("'sold'", "no dates")),
    Refusal("8-float32-overflow-named-in-the-data",
            lambda t: run_args(t, write_suite(t, synthetic_frame().assign(
                x1=lambda f: f["x1"].where(f.index != 7, 1e39)))),
            ("'x1'", "row 7", "float32")),
    Refusal("8-models-only-commas",
            lambda t: run_args(t, write_suite(t))[:3] + ["--models", ",", "--out",
                                                         str(t / "out")],
            ("--models",)),
]


@pytest.mark.parametrize("case", REFUSED, ids=[c.id for c in REFUSED])
def test_refused_with_one_sentence(case, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    argv = [str(a) for a in case.build(tmp_path)]
    capsys.readouterr()
    code = main(argv)
    out, err = capsys.readouterr()
    lines = [line for line in err.splitlines() if line.strip()]
    assert code == 2, err
    assert out == "" and len(lines) == 1 and lines[0].startswith("tabpar: error: "), err
    assert "Traceback" not in err
    for word in case.named:
        assert word in lines[0], (word, lines[0])
    assert not (tmp_path / "out").exists()  # refused before anything was written


def test_the_validation_layer_still_accepts_sound_values(tmp_path):
    """A local TOML date as cutoff and distinct scalar ordinal levels load as before."""
    from tabpar.data.suites import load_suite

    suite = write_suite(tmp_path, drop="[]", dates='["when"]', ordinal="{ x2 = [0, 1, 2, 3, 4] }",
                        holdout='{ policy = "time", date = "when", cutoff = 2020-03-01 }')
    task = load_suite(suite).tasks[0]
    assert task.holdout.cutoff == "2020-03-01"
    assert task.ordinal == (("x2", (0, 1, 2, 3, 4)),)


def test_variant_with_negative_one_hot_levels_is_refused(tmp_path):
    from tabpar.common.errors import UserError
    from tabpar.procedure.variants import resolve_procedure

    path = tmp_path / "v.toml"
    path.write_text('[variant]\nname = "v"\none_hot_max_levels = -3\n')
    with pytest.raises(UserError, match="one_hot_max_levels"):
        resolve_procedure(str(path))


def test_huge_row_id_is_named_not_wrapped(tmp_path):
    """1e30 does not fit int64 (NumPy's documented range, ±9.2e18): it must be named as given,
    not shown as the negative number a cast would give."""
    from tabpar.common.errors import UserError
    from tabpar.evaluation.placement import read_predictions_file

    path = tmp_path / "p.csv"
    pd.DataFrame({"row_id": [1e30, 1.0], "prediction": [0.5, 0.5]}).to_csv(path, index=False)
    with pytest.raises(UserError, match=r"1e\+30") as caught:
        read_predictions_file(path, np.array([0, 1]), "regression", "t")
    assert "-" not in str(caught.value).split("row_id")[1].split(",")[0]


def test_a_long_csv_is_typed_from_whole_columns(tmp_path):
    """pandas guesses types chunk by chunk unless low_memory=False (pandas read_csv docs); a
    column of numbers with text far down must come back as one type, not a mix."""
    from tabpar.data.sources import read_table

    n = 270_000  # past the C parser's first chunk of 262,144 rows
    code = np.arange(n).astype(object)
    code[-1] = "A9"
    pd.DataFrame({"code": code, "y": np.arange(n) % 7}).to_csv(tmp_path / "d.csv", index=False)
    frame = read_table(tmp_path / "d.csv")
    assert frame["code"].map(type).nunique() == 1


# --- class 3: wrong results that were silent --------------------------------------------------

def _strict_rows(path: Path) -> list:
    """jobs.jsonl read as standard JSON (RFC 8259 has no Infinity or NaN)."""
    def refuse(token):
        raise ValueError(f"not standard JSON: {token}")
    return [json.loads(line, parse_constant=refuse) for line in path.read_text().splitlines()]


def test_an_overflowing_score_is_a_failed_job_not_infinity(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    frame = synthetic_frame().assign(y=lambda f: 1e300 * (1.5 + np.sign(f["y"])))
    suite = write_suite(tmp_path, frame)
    assert main(run_args(tmp_path, suite)) == 1  # the job failed
    rows = _strict_rows(tmp_path / "out" / "jobs.jsonl")
    assert [r["status"] for r in rows] == ["failed"]
    assert "not a finite number" in rows[0]["error"]


def test_jobs_of_other_data_are_not_reused_without_run_json(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    suite = write_suite(tmp_path)
    assert main(run_args(tmp_path, suite)) == 0
    (tmp_path / "out" / "run.json").unlink()
    changed = synthetic_frame()
    changed.loc[5, "x1"] = 99.0
    changed.to_csv(tmp_path / "d.csv", index=False)
    import tabpar

    result = tabpar.run_suite(suite, models=["naive"], seeds=1, out=tmp_path / "out", workers=1)
    assert result.reused == 0 and result.ok == 1
    fingerprints = {r["fingerprint"] for r in _strict_rows(tmp_path / "out" / "jobs.jsonl")}
    assert len(fingerprints) == 2


def test_jobs_of_other_preparing_code_are_run_again_and_win(tmp_path, monkeypatch):
    # a rerun after a change to loading, splitting or preparing (a new preparing-code digest)
    # must not keep scores the old code made: every job runs again and its row wins
    monkeypatch.chdir(tmp_path)
    suite = write_suite(tmp_path)
    assert main(run_args(tmp_path, suite)) == 0
    import tabpar
    import tabpar.execution.jobs as jobs

    old_code = _strict_rows(tmp_path / "out" / "jobs.jsonl")[0]["code"]
    monkeypatch.setattr(jobs, "preparation_code_digest", lambda: "0123456789abcdef")
    result = tabpar.run_suite(suite, models=["naive"], seeds=1, out=tmp_path / "out", workers=1)
    assert result.reused == 0 and result.ok == 1
    codes = [r["code"] for r in _strict_rows(tmp_path / "out" / "jobs.jsonl")]
    assert codes == [old_code, "0123456789abcdef"]
    assert tabpar.load_results(tmp_path / "out")["code"].tolist() == ["0123456789abcdef"]
    again = tabpar.run_suite(suite, models=["naive"], seeds=1, out=tmp_path / "out", workers=1)
    assert again.reused == 1  # the new code's row is reused as usual


def test_a_reference_rebuilt_in_place_after_a_code_change_publishes_only_new_rows(
        tmp_path, monkeypatch):
    import json

    import tabpar.execution.jobs as jobs
    from tabpar.evaluation.reference import build_reference

    suite, ref = write_suite(tmp_path), tmp_path / "ref"
    first = build_reference(str(suite), out=ref, seeds=1, workers=1)
    assert first.ok == first.jobs and (ref / "provenance.json").is_file()
    monkeypatch.setattr(jobs, "preparation_code_digest", lambda: "0123456789abcdef")
    again = build_reference(str(suite), out=ref, seeds=1, workers=1, replace=True)
    assert again.reused == 0 and again.ok == again.jobs
    rows = _strict_rows(ref / "jobs.jsonl")
    assert len(rows) == again.jobs and {r["code"] for r in rows} == {"0123456789abcdef"}
    provenance = json.loads((ref / "provenance.json").read_text())
    assert provenance["rows_superseded"] == first.jobs and provenance["jobs_reused"] == 0


def test_an_interrupted_reference_build_is_not_published(tmp_path, monkeypatch, capsys):
    import tabpar.evaluation.reference as reference

    real = reference.run_suite

    def cut_short(*args, **kwargs):  # stand-in for Ctrl-C after the first jobs
        result = real(*args, **{**kwargs, "models": ["naive"]})
        result.interrupted = True
        return result

    monkeypatch.setattr(reference, "run_suite", cut_short)
    out = tmp_path / "ref"
    code = main(["reference", "build", "--suite", str(write_suite(tmp_path)), "--out", str(out),
                 "--seeds", "1", "--workers", "1", "--quiet"])
    assert code == 130 and "to resume the build" in capsys.readouterr().err
    assert (out / "jobs.jsonl").is_file() and not (out / "provenance.json").exists()


def test_a_cache_entry_with_replaced_arrays_is_rebuilt(tmp_path):
    from tabpar.data.suites import load_suite
    from tabpar.execution.cache import load_arrays, prepare_task

    task = load_suite(write_suite(tmp_path)).tasks[0]
    first = prepare_task(task, cache_dir=tmp_path / "cache")
    right = np.array(load_arrays(first.folder)["y_holdout"])
    np.save(first.folder / "y_holdout.npy", right[::-1] + 1.0)  # valid, but wrong
    again = prepare_task(task, cache_dir=tmp_path / "cache")
    np.testing.assert_array_equal(np.asarray(load_arrays(again.folder)["y_holdout"]), right)


def test_an_interrupted_compare_baseline_stops_with_130(tmp_path, monkeypatch, capsys):
    """A baseline run cut short (as Ctrl-C or SIGTERM leave it) must not become a report."""
    import tabpar.evaluation.comparison as comparison

    real = comparison.run_suite

    def interrupted(*args, **kwargs):
        result = real(*args, **kwargs)
        result.interrupted = True
        return result

    monkeypatch.chdir(tmp_path)
    monkeypatch.setattr(comparison, "run_suite", interrupted)
    code = main(["compare", "--candidate", "builtin", "--suite", str(write_suite(tmp_path)),
                 "--models", "linear", "--seeds", "1", "--workers", "1", "--out",
                 str(tmp_path / "cmp")])
    assert code == 130
    assert not (tmp_path / "cmp" / "report.json").exists()
    assert "interrupted" in capsys.readouterr().err


def test_an_interrupted_calibrate_zoo_stops(tmp_path, monkeypatch):
    """calibrate's zoo: an interrupted model run stops the zoo instead of going on."""
    import tabpar.owndata.budget as budget
    from tabpar.data.suites import load_suite

    real, calls = budget.run_suite, []

    def interrupted(*args, **kwargs):
        calls.append(kwargs["models"])
        result = real(*args, **kwargs)
        result.interrupted = True
        return result

    monkeypatch.setattr(budget, "run_suite", interrupted)
    suite = load_suite(write_suite(tmp_path))
    with pytest.raises(KeyboardInterrupt):
        budget.run_zoo(suite, ["naive", "linear"], 1, tmp_path / "run", 1, None, 0.0, None,
                       lambda message: None)
    assert calls == [["naive"]]


# --- classes 6 and 7: candidate code ----------------------------------------------------------

def _compare(tmp: Path, spec: str, *extra) -> list:
    return ["compare", "--candidate", spec, "--suite", str(write_suite(tmp)), "--models",
            "linear", "--seeds", "1", "--workers", "1", "--out", str(tmp / "cmp"), *extra]


CANDIDATE_FAILURES = [
    ("raises-while-built", "tp_hostile:raises_when_built", ("RuntimeError", "cannot build")),
    ("wrong-arguments", "tp_hostile:takes_two_arguments", ("TypeError", "one argument")),
    ("syntax-error", "broken_syntax:make", ("syntax error", "line 2")),
    ("raises-at-import", "raises_at_import:make", ("ImportError", "imported")),
    ("calls-sys-exit", "tp_hostile:exits_in_fit", ("sys.exit(0)",)),
    # a 120-row preparation takes well under a second; the candidate sleeps 600 s
    ("hangs", "tp_hostile:hangs_in_fit", ("did not finish", "--job-timeout"), "--job-timeout",
     "8"),
]


@pytest.mark.parametrize("spec,named,extra", [(c[1], c[2], c[3:]) for c in CANDIDATE_FAILURES],
                         ids=[c[0] for c in CANDIDATE_FAILURES])
def test_candidate_failures_get_one_sentence(spec, named, extra, tmp_path, monkeypatch, capfd):
    monkeypatch.chdir(tmp_path)
    monkeypatch.syspath_prepend(str(CANDIDATES))
    (tmp_path / "broken_syntax.py").write_text("def make():\n    return (\n")
    (tmp_path / "raises_at_import.py").write_text("raise ImportError('on purpose')\n")
    code = main(_compare(tmp_path, spec, *extra))
    out, err = capfd.readouterr()
    lines = [line for line in err.splitlines() if line.strip()]
    assert code == 2, err
    assert out == "" and len(lines) == 1 and lines[0].startswith("tabpar: error: "), err
    for word in named:
        assert word in lines[0], (word, lines[0])
    assert not (tmp_path / "cmp").exists()


def test_a_sparse_candidate_is_compared(tmp_path, monkeypatch, capfd):
    """SciPy sparse output is numeric features: compared like a dense one."""
    monkeypatch.chdir(tmp_path)
    monkeypatch.syspath_prepend(str(CANDIDATES))
    code = main(_compare(tmp_path, "tp_hostile:returns_sparse", "--json"))
    out, err = capfd.readouterr()
    assert code in (0, 1), err
    assert json.loads(out)["tasks"][0]["call"] in ("better", "same", "worse")


def test_candidate_prints_stay_off_stdout(tmp_path, monkeypatch, capfd):
    monkeypatch.chdir(tmp_path)
    monkeypatch.syspath_prepend(str(CANDIDATES))
    code = main(_compare(tmp_path, "tp_hostile:prints_to_stdout", "--json"))
    out, err = capfd.readouterr()
    assert code in (0, 1), err
    json.loads(out)  # --json output is one JSON document: no candidate prints in it
    assert "transforming" in err


def test_the_working_folder_is_on_sys_path_only_while_the_candidate_imports(tmp_path,
                                                                          monkeypatch):
    """A file named like a dependency in the working folder must not shadow it afterwards."""
    from tabpar.procedure.variants import resolve_procedure

    monkeypatch.chdir(tmp_path)
    (tmp_path / "lightgbm.py").write_text("raise SystemExit('the planted lightgbm ran')\n")
    (tmp_path / "my_procedure.py").write_text(
        "from sklearn.preprocessing import StandardScaler\n\n"
        "def make():\n    return StandardScaler()\n")
    before = list(sys.path)
    procedure = resolve_procedure("my_procedure:make")
    assert procedure.user_code
    assert sys.path == before
    found = importlib.machinery.PathFinder.find_spec("lightgbm")
    assert found is None or Path(found.origin).parent != tmp_path
    sys.modules.pop("my_procedure", None)


def test_a_forest_in_a_worker_runs_with_the_threads_its_row_records(tmp_path, capfd):
    """One job on two workers gets both cores (threads 2); in a worker process joblib's default
    backend would quietly run the forest with n_jobs=1 (its warning, scikit-learn's
    ensemble/_base.py, names that)."""
    import tabpar
    from tabpar.common.system import available_cores

    suite = write_suite(tmp_path)
    result = tabpar.run_suite(suite, models=["rf"], seeds=1, out=tmp_path / "out", workers=2)
    err = capfd.readouterr().err
    assert result.ok == 1
    rows = _strict_rows(tmp_path / "out" / "jobs.jsonl")
    assert rows[0]["threads"] == available_cores()  # the idle worker's cores go to the job
    assert "setting n_jobs=1" not in err
