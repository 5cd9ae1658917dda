"""Hostile files and faults (issue 17, classes 1, 4, 5 and 9): one table, one test.

Each case of ``CASES`` builds one fault in its own folder and calls tabpar the way a user would
(the CLI's ``main`` in-process, or the Python API). It must end in one of three ways:

- ``error``: one sentence (a ``UserError``, or on the CLI exit code 2 with one ``tabpar: error:``
  line and no traceback) that matches the case's pattern, which names the file and the fix;
- ``ok``: the call succeeds, and the case's own check holds (e.g. a truncated cache entry was
  rebuilt, a torn last line was skipped with a warning).

Classes (issue 17): 1 = files that are not regular files, or a header past the reader's bounds;
4 = state tabpar wrote, corrupted (results, run metadata, cache entries, stores, reports, the
OpenML cache); 5 = the environment (cache folder, HOME, a full disk, an ASCII terminal, the cache
cleared during a run); 9 = OpenML (the package's own errors, a failing import, its
configuration after a call).

Every data file here is a SYNTHETIC stand-in generated below (columns x1, x2, y); none is real
data. A full disk is simulated by making ``os.fsync`` (or ``numpy.save``) raise ENOSPC, which is
where a real full disk reports itself on a buffered write.
"""
from __future__ import annotations

import errno
import io
import json
import os
import re
import shutil
import socket
import sys
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
import pytest
import tabpar
from tabpar.cli.main import main
from tabpar.common.errors import UserError
from tabpar.common.files import MAX_COLUMNS, StateWarning
from tabpar.data.sources import read_table
from tabpar.data.suites import load_suite
from tabpar.evaluation.reference import Reference
from tabpar.execution import cache as cache_module
from tabpar.execution.store import load_results

SUITE = """[suite]
name = "synthetic"

[[task]]
name = "t"
source = "csv:d.csv"
target = "y"
type = "regression"
metric = "rmse"
"""


def synthetic_frame(n: int = 120) -> pd.DataFrame:
    """SYNTHETIC rows: two features and a numeric target."""
    rng = np.random.default_rng(0)
    x1 = rng.normal(size=n).round(4)
    x2 = rng.integers(0, 5, n)
    return pd.DataFrame({"x1": x1, "x2": x2, "y": (3 * x1 + x2 + rng.normal(size=n)).round(4)})


@pytest.fixture(scope="module")
def kit(tmp_path_factory):
    """A synthetic task and one finished run of it (naive and rf, one seed), read-only."""
    root = tmp_path_factory.mktemp("kit")
    synthetic_frame().to_csv(root / "d.csv", index=False)
    (root / "s.toml").write_text(SUITE)
    tabpar.run_suite(root / "s.toml", models=["naive", "rf"], seeds=1, out=root / "run",
                     workers=1)
    return root


class Ctx:
    """One case's folder, with a copy of the kit (data, suite, results folder)."""

    def __init__(self, tmp: Path, kit: Path, monkeypatch):
        self.tmp, self.monkeypatch = tmp, monkeypatch
        shutil.copy(kit / "d.csv", tmp / "d.csv")
        shutil.copy(kit / "s.toml", tmp / "s.toml")
        shutil.copytree(kit / "run", tmp / "run")
        self.run_dir = tmp / "run"
        self.jobs = self.run_dir / "jobs.jsonl"

    def run(self, *extra, out=None):
        return ["run", "--suite", self.tmp / "s.toml", "--models", "naive", "--seeds", "1",
                "--workers", "1", "--out", out or self.run_dir, *extra]

    def job_lines(self) -> list[dict]:
        return [json.loads(line) for line in self.jobs.read_text().splitlines()]

    def write_jobs(self, rows: list, raw_middle: bytes | None = None) -> None:
        lines = [json.dumps(r, sort_keys=True).encode() for r in rows]
        if raw_middle is not None:
            lines.insert(1, raw_middle)
        self.jobs.write_bytes(b"\n".join(lines) + b"\n")

    def full_disk(self, target=os, name="fsync"):
        """Every ``target.name`` call fails as a full disk does."""
        def no_space(*args, **kwargs):
            raise OSError(errno.ENOSPC, "No space left on device")
        self.monkeypatch.setattr(target, name, no_space)

    def csv_with_header(self, fields: list[str], name="wide.csv") -> Path:
        path = self.tmp / name
        path.write_text(",".join(fields) + "\n" + ",".join("1" for _ in fields) + "\n")
        return path


@dataclass
class Case:
    id: str
    cls: int  # the class of failure
    kind: str  # "error" (API UserError), "cli" (exit 2, one line) or "ok"
    expect: str  # regex the sentence must match ("ok": unused)
    build: Callable


CASES: list[Case] = []


def case(id, cls, kind, expect=""):
    def register(build):
        CASES.append(Case(id, cls, kind, expect, build))
        return build
    return register


def finishes(call, unblock: Callable) -> object:
    """``call()``'s result; when it is still blocked after a minute (today's code waiting on a
    FIFO forever), ``unblock()`` releases it and the case fails as a hang (a hang guard, not a
    speed check)."""
    outcome: dict = {}

    def target():
        try:
            outcome["value"] = call()
        except BaseException as exc:  # handed to the test thread
            outcome["error"] = exc

    thread = threading.Thread(target=target, daemon=True)
    thread.start()
    thread.join(60)
    if thread.is_alive():
        unblock()
        thread.join(60)
        raise AssertionError("the read blocked on a file that is not a regular file")
    if "error" in outcome:
        raise outcome["error"]
    return outcome["value"]


def fifo_unblocker(path: Path):
    def unblock():
        fd = os.open(path, os.O_WRONLY | os.O_NONBLOCK)  # a writer lets open() return ...
        os.close(fd)  # ... and closing it ends the reads
    return unblock


# --- class 1: files that are not regular files; bounded reads ----------------------------------
@case("source-is-a-fifo", 1, "cli", r"d\.csv is a named pipe \(FIFO\), not a regular file; give")
def _(c):
    (c.tmp / "d.csv").unlink()
    os.mkfifo(c.tmp / "d.csv")
    argv = c.run(out=c.tmp / "out")
    return lambda: finishes(lambda: main([str(a) for a in argv]),
                            fifo_unblocker(c.tmp / "d.csv"))


@case("source-links-to-a-device", 1, "cli", r"d\.csv is a device, not a regular file; give")
def _(c):
    (c.tmp / "d.csv").unlink()
    (c.tmp / "d.csv").symlink_to("/dev/null")  # followed, then checked
    return c.run(out=c.tmp / "out")


@case("leaderboard-import-is-a-fifo", 1, "error", r"board\.csv is a named pipe .*not a regular")
def _(c):
    os.mkfifo(c.tmp / "board.csv")
    return lambda: finishes(
        lambda: tabpar.leaderboards.import_leaderboard(c.tmp / "board.csv", task="t",
                                                       score_column="s", lower_is_better=True),
        fifo_unblocker(c.tmp / "board.csv"))


@case("predictions-file-is-a-socket", 1, "error", r"p\.csv is a socket, not a regular file")
def _(c):
    server = socket.socket(socket.AF_UNIX)
    server.bind(str(c.tmp / "p.csv"))
    c.server = server  # kept open for the case
    return lambda: read_table(c.tmp / "p.csv")


@case("calibrate-table-is-a-folder", 1, "cli", r"t\.csv is a folder, not a regular file; give")
def _(c):
    (c.tmp / "t.csv").mkdir()
    return ["calibrate", c.tmp / "t.csv", "--target", "y", "--score", "1", "--out",
            c.tmp / "cal"]


@case("header-with-too-many-columns", 1, "error", rf"has {MAX_COLUMNS + 1:,} columns, more than")
def _(c):
    path = c.csv_with_header([f"c{i}" for i in range(MAX_COLUMNS + 1)])
    return lambda: read_table(path)


@case("header-line-past-the-bound", 1, "error", r"header line of .*wide\.csv is longer than 1 MiB")
def _(c):
    path = c.csv_with_header(["x" * (2 << 20)])  # one 2 MiB name: no table has one
    return lambda: read_table(path)


# --- class 4: corrupted state -------------------------------------------------------------------
@case("jobs-line-with-text-score", 4, "error",
      r"Line 2 of .*jobs\.jsonl has score 'abc', not a number or null; delete that line")
def _(c):
    rows = c.job_lines()
    c.write_jobs([rows[0], {**rows[1], "score": "abc"}])
    return lambda: load_results(c.run_dir)


@case("jobs-line-with-text-seed-on-resume", 4, "cli",
      r"Line 1 of .*jobs\.jsonl has seed '0', not a whole number; delete that line")
def _(c):
    rows = c.job_lines()
    c.write_jobs([{**rows[0], "seed": "0"}] + rows[1:])
    return c.run()


@case("jobs-line-torn-in-the-middle", 4, "error",
      r"Line 2 of .*jobs\.jsonl is torn or not JSON; delete that line")
def _(c):
    rows = c.job_lines()
    c.write_jobs(rows, raw_middle=json.dumps(rows[0])[:40].encode())
    return lambda: load_results(c.run_dir)


@case("jobs-last-line-torn-is-skipped-with-a-warning", 4, "ok")
def _(c):
    whole = c.job_lines()
    with open(c.jobs, "ab") as handle:
        handle.write(json.dumps(whole[0]).encode()[:30])  # a crash cut this append short

    def check():
        with pytest.warns(StateWarning, match=r"line 3 of .*jobs\.jsonl is incomplete"):
            frame = load_results(c.run_dir)
        assert len(frame) == len(whole)
    return check


@case("jobs-file-is-a-folder", 4, "cli", r"jobs\.jsonl is not a regular file; delete it")
def _(c):
    c.jobs.unlink()
    c.jobs.mkdir()
    return c.run()


@case("lock-is-a-folder", 4, "cli", r"lock file .*\.lock \(Is a directory\); delete it")
def _(c):
    (c.run_dir / ".lock").unlink(missing_ok=True)
    (c.run_dir / ".lock").mkdir()
    return c.run()


@case("run-json-torn", 4, "error", r"run\.json is torn or not JSON .*; use another --out")
def _(c):
    path = c.run_dir / "run.json"
    path.write_bytes(path.read_bytes()[:50])
    return lambda: Reference(c.run_dir)


@case("run-json-holds-an-array", 4, "cli", r"run\.json holds a JSON array where tabpar wrote a "
                                           r"JSON object; use another --out")
def _(c):
    (c.run_dir / "run.json").write_text("[1, 2, 3]")
    return c.run()


@case("reference-predictions-deleted", 4, "error",
      r"predictions file .*rf-seed0\.parquet is missing; rerun its job")
def _(c):
    (c.run_dir / "predictions" / "t" / "rf-seed0.parquet").unlink()
    return lambda: Reference(c.run_dir).predictions("t", "rf")


@case("reference-predictions-truncated", 4, "error",
      r"predictions file .*rf-seed0\.parquet is torn or not Parquet")
def _(c):
    path = c.run_dir / "predictions" / "t" / "rf-seed0.parquet"
    path.write_bytes(path.read_bytes()[:100])
    return lambda: Reference(c.run_dir).predictions("t", "rf")


@case("reference-predictions-outside-the-folder", 4, "error",
      r"predictions path .* leads outside the results folder .*; delete that job.s line")
def _(c):
    shutil.copy(c.run_dir / "predictions" / "t" / "rf-seed0.parquet", c.tmp / "elsewhere.pq")
    rows = [{**r, "predictions": "../elsewhere.pq"} if r["model"] == "rf" else r
            for r in c.job_lines()]
    c.write_jobs(rows)
    return lambda: Reference(c.run_dir).predictions("t", "rf")


@case("cache-metadata-torn", 4, "ok")
def _(c):
    c.monkeypatch.setenv("TABPAR_CACHE", str(c.tmp / "cache"))
    task = load_suite(c.tmp / "s.toml").task("t")
    folder = cache_module.prepare_task(task).folder
    (folder / "meta.json").write_text('{"fingerprint": "ab')

    def check():
        [entry] = cache_module.cache_info()["entries"]
        assert entry["procedure"] == "torn, rebuilt when used"
        assert cache_module.prepare_task(task).n_train > 0  # prepared again
    return check


@case("cache-array-truncated-is-rebuilt", 4, "ok")
def _(c):
    c.monkeypatch.setenv("TABPAR_CACHE", str(c.tmp / "cache"))
    task = load_suite(c.tmp / "s.toml").task("t")
    folder = cache_module.prepare_task(task).folder
    whole = np.load(folder / "X_train.npy")
    path = folder / "X_train.npy"
    path.write_bytes(path.read_bytes()[:200])  # a copy cut short

    def check():
        again = cache_module.prepare_task(task)
        np.testing.assert_array_equal(cache_module.load_arrays(again.folder)["X_train"], whole)
    return check


@case("calibrate-report-torn", 4, "cli", r"report\.json is torn or not JSON .*; delete it to "
                                         r"calibrate into .* afresh")
def _(c):
    (c.tmp / "cal").mkdir()
    (c.tmp / "cal" / "report.json").write_text('{"task": {"na')
    return ["calibrate", c.tmp / "d.csv", "--target", "y", "--score", "1", "--out",
            c.tmp / "cal", "--reference", c.run_dir]


@case("leaderboard-direction-is-text", 4, "error",
      r"leaderboard .*b\.json has lower_is_better 'no', not true or false; import or pull")
def _(c):
    pd.DataFrame({"s": [0.5, 0.7, 0.9]}).to_csv(c.tmp / "b.csv", index=False)
    store = c.tmp / "store"
    tabpar.leaderboards.import_leaderboard(c.tmp / "b.csv", task="t", score_column="s",
                                           lower_is_better=False, store=store)
    meta = json.loads((store / "b.json").read_text())
    (store / "b.json").write_text(json.dumps({**meta, "lower_is_better": "no"}))
    return lambda: tabpar.leaderboards.load_leaderboard("b", store=store)


@case("openml-cache-entry-torn", 4, "error",
      r"task-31/task\.json is torn or not JSON .*; delete the folder .*task-31 so it is "
      r"downloaded again")
def _(c):
    c.monkeypatch.setenv("TABPAR_OPENML_CACHE", str(c.tmp / "om"))
    folder = c.tmp / "om" / "tabpar" / "task-31"
    folder.mkdir(parents=True)
    (folder / "task.json").write_text('{"task_id": 31, "ty')
    from tabpar.data.openml_source import openml_task_info
    return lambda: openml_task_info(31)


@case("openml-cached-rows-truncated", 4, "error",
      r"task-31/rows\.parquet is torn or not Parquet .*; delete the folder")
def _(c):
    c.monkeypatch.setenv("TABPAR_OPENML_CACHE", str(c.tmp / "om"))
    folder = c.tmp / "om" / "tabpar" / "task-31"
    folder.mkdir(parents=True)
    synthetic_frame().to_parquet(folder / "rows.parquet")
    data = (folder / "rows.parquet").read_bytes()
    (folder / "rows.parquet").write_bytes(data[: len(data) // 2])
    from tabpar.data.sources import load_source
    return lambda: load_source("openml:31")


# --- class 5: the environment and the file system ----------------------------------------------
@case("cache-folder-is-a-file", 5, "cli", r"Cannot write .*cache-file/prepared/t-\w+ \(Not a "
                                          r"directory\); set TABPAR_CACHE to a writable folder")
def _(c):
    (c.tmp / "cache-file").write_text("not a folder")
    c.monkeypatch.setenv("TABPAR_CACHE", str(c.tmp / "cache-file"))
    return c.run(out=c.tmp / "out")


@case("cache-folder-under-proc", 5, "cli", r"Cannot write /proc/tabpar-cache/prepared/t-\w+ "
                                           r"\(.*\); set TABPAR_CACHE")
def _(c):
    c.monkeypatch.setenv("TABPAR_CACHE", "/proc/tabpar-cache")
    return c.run(out=c.tmp / "out")


@case("cache-folder-read-only", 5, "cli", r"Cannot write .*ro-cache/prepared/t-\w+ \(Read-only "
                                          r"file system\); set TABPAR_CACHE to a writable")
def _(c):
    # a read-only mount answers EROFS on the first write (tests run as root, whom file modes
    # do not stop, so the mount is simulated where the cache entry's folder is made)
    import tempfile

    def read_only(*args, **kwargs):
        raise OSError(errno.EROFS, "Read-only file system")
    c.monkeypatch.setenv("TABPAR_CACHE", str(c.tmp / "ro-cache"))
    c.monkeypatch.setattr(tempfile, "mkdtemp", read_only)
    return c.run(out=c.tmp / "out")


@case("home-is-unusable", 5, "cli", r"Cannot write .*home-file/\.cache/tabpar/prepared/t-\w+ "
                                    r"\(Not a directory\); set TABPAR_CACHE")
def _(c):
    (c.tmp / "home-file").write_text("not a folder")
    c.monkeypatch.delenv("TABPAR_CACHE")
    c.monkeypatch.delenv("XDG_CACHE_HOME", raising=False)
    c.monkeypatch.setenv("HOME", str(c.tmp / "home-file"))
    return c.run(out=c.tmp / "out")


@case("cache-on-a-full-disk", 5, "cli", r"Cannot write .*prepared/t-\w+ \(No space left on "
                                        r"device\); set TABPAR_CACHE to a writable folder with "
                                        r"free space")
def _(c):
    c.monkeypatch.setenv("TABPAR_CACHE", str(c.tmp / "fresh-cache"))
    c.full_disk(np, "save")
    return c.run(out=c.tmp / "out")


@case("out-on-a-full-disk", 5, "cli", r"Cannot write .*out/run\.json \(No space left on device\); "
                                      r"free disk space and run again with the same --out")
def _(c):
    tabpar.execution.cache.prepare_task(load_suite(c.tmp / "s.toml").task("t"))  # cached first
    c.full_disk()
    return c.run(out=c.tmp / "out")


@case("export-on-a-full-disk", 5, "cli", r"Cannot write .*exported/train\.csv \(No space left "
                                         r"on device\); free disk space")
def _(c):
    c.full_disk()
    return ["export", "t", c.tmp / "exported", "--suite", c.tmp / "s.toml"]


@case("jobs-append-on-a-full-disk", 5, "error", r"Cannot record a finished job in .*jobs\.jsonl "
                                                r"\(No space left on device\); free disk space")
def _(c):
    store = tabpar.execution.store.ResultsStore(c.run_dir)
    row = c.job_lines()[0]
    c.full_disk()
    return lambda: store.append(row)


@case("cache-cleared-during-a-run-keeps-finished-jobs", 5, "ok")
def _(c):
    c.monkeypatch.setenv("TABPAR_CACHE", str(c.tmp / "cache"))
    real = tabpar.execution.jobs.execute_job
    calls = []

    def clear_after_the_first(job):
        result = real(job)
        if not calls:
            cache_module.cache_clear()  # what `tabpar cache clear` does meanwhile
        calls.append(job["model"])
        return result
    c.monkeypatch.setattr(tabpar.execution.runner, "execute_job", clear_after_the_first)

    def check():
        result = tabpar.run_suite(c.tmp / "s.toml", models=["naive", "rf"], seeds=1,
                                  out=c.tmp / "out", workers=1)
        rows = {r["model"]: r for r in load_results(c.tmp / "out").to_dict("records")}
        first = calls[0]
        assert rows[first]["status"] == "ok" and rows[first]["predictions"]  # kept
        other = ({"naive", "rf"} - {first}).pop()
        assert rows[other]["status"] == "failed"
        assert "removed while in use" in rows[other]["error"]
        assert result.ok == 1
    return check


@case("ascii-terminal-prints-the-dash", 5, "ok")
def _(c):
    argv = [str(a) for a in c.run(out=c.tmp / "out")]

    def check():
        raw = io.BytesIO()
        stdout = io.TextIOWrapper(raw, encoding="ascii", errors="strict")
        c.monkeypatch.setattr(sys, "stdout", stdout)
        assert main(argv) == 0
        stdout.flush()
        assert b"t \\u2014 rmse" in raw.getvalue()  # the dash escaped, not a crash
    return check


# --- class 9: OpenML ----------------------------------------------------------------------------
@case("openml-private-dataset", 9, "error",
      r"could not fetch OpenML task 31 and its rows \(OpenMLPrivateDatasetError: .*\); check "
      r"the id")
def _(c):
    openml = pytest.importorskip("openml")
    from unittest.mock import create_autospec

    from tabpar.data import openml_source

    c.monkeypatch.setenv("TABPAR_OPENML_CACHE", str(c.tmp / "om"))
    c.monkeypatch.setattr(openml_source, "_reach", lambda host, port, timeout=5.0: None)

    def private(*args, **kwargs):
        raise openml.exceptions.OpenMLPrivateDatasetError("This dataset is private")
    c.monkeypatch.setattr(openml.tasks, "get_task",
                          create_autospec(openml.tasks.get_task, side_effect=private))
    from tabpar.data.sources import load_source
    return lambda: load_source("openml:31")


@case("openml-import-cannot-create-its-folder", 9, "error",
      r"openml package cannot create its cache folder .*; set HOME or TABPAR_OPENML_CACHE")
def _(c):
    pytest.importorskip("openml")
    (c.tmp / "blocker").write_text("a file where a folder should be")
    c.monkeypatch.setenv("TABPAR_OPENML_CACHE", str(c.tmp / "blocker" / "om"))
    c.monkeypatch.setenv("OPENML_CACHE_DIR", str(c.tmp / "blocker" / "own"))
    for name in [m for m in sys.modules if m == "openml" or m.startswith("openml.")]:
        c.monkeypatch.delitem(sys.modules, name)  # imported afresh, as in a new process
    from tabpar.data.openml_source import import_openml
    return import_openml


@case("openml-configuration-restored-after-a-call", 9, "ok")
def _(c):
    openml = pytest.importorskip("openml")
    from unittest.mock import create_autospec

    from tabpar.data import openml_source

    c.monkeypatch.setenv("TABPAR_OPENML_CACHE", str(c.tmp / "om"))
    c.monkeypatch.setattr(openml_source, "_reach", lambda host, port, timeout=5.0: None)
    own = openml.config.get_config_as_dict()["cachedir"]
    seen = []

    def unknown(task_id, *args, **kwargs):
        seen.append(openml.config.get_cache_directory())
        raise openml.exceptions.OpenMLServerException("Unknown task", code=151)
    c.monkeypatch.setattr(openml.tasks, "get_task",
                          create_autospec(openml.tasks.get_task, side_effect=unknown))

    def check():
        with pytest.raises(UserError, match="refused OpenML task 31"):
            openml_source.openml_task_info(31)
        assert seen and seen[0].startswith(str(c.tmp / "om"))  # ours during the call
        assert openml.config.get_config_as_dict()["cachedir"] == own  # theirs after it
    return check


def _params():
    for c in CASES:
        yield pytest.param(c, id=f"class{c.cls}-{c.id}")


def test_every_class_has_cases():
    classes = {c.cls for c in CASES}
    assert classes == {1, 4, 5, 9}
    assert len({c.id for c in CASES}) == len(CASES)


@pytest.mark.parametrize("case", list(_params()))
def test_fault_gets_one_sentence_or_is_handled(case, kit, tmp_path, monkeypatch, capsys):
    work = tmp_path / "case"
    work.mkdir()
    monkeypatch.chdir(work)
    monkeypatch.setenv("TABPAR_LEADERBOARDS", str(work / "store"))
    ctx = Ctx(work, kit, monkeypatch)
    built = case.build(ctx)
    if case.kind == "ok":
        built()
        return
    if case.kind == "error":
        with pytest.raises(UserError) as err:
            built()
        sentence = str(err.value)
    else:
        capsys.readouterr()
        code = built() if callable(built) else main([str(a) for a in built])
        monkeypatch.undo()  # the full disk ends before pytest writes anything
        captured = capsys.readouterr()
        assert "Traceback" not in captured.err, captured.err
        assert code == 2, captured.err
        lines = captured.err.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("tabpar: error: "), captured.err
        sentence = lines[0][len("tabpar: error: "):]
    assert re.search(case.expect, sentence), sentence
    assert sentence.endswith(".") and "\n" not in sentence
