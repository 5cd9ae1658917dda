"""The built wheel works on its own: package data (suites, published references) inside it, the
console script installed, run from an unrelated folder with no checkout in sight.

The wheel is installed without dependencies into a fresh virtual environment that borrows this
environment's installed libraries through a path file, so the test needs no network and takes
seconds; ``import tabpar`` there can only come from the wheel (this environment's editable
install is a finder hook that a path file does not activate).
"""
from __future__ import annotations

import os
import subprocess
import sys
import sysconfig
import venv
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def wheel_env(tmp_path_factory):
    base = tmp_path_factory.mktemp("wheel")
    built = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w",
                            str(base / "dist"), str(ROOT)], capture_output=True, text=True)
    assert built.returncode == 0, built.stderr[-2000:]
    wheel = next((base / "dist").glob("tabpar-*.whl"))
    env_dir = base / "venv"
    venv.EnvBuilder(with_pip=False).create(env_dir)
    python = env_dir / "bin" / "python"
    site = subprocess.run([str(python), "-c", "import sysconfig; print(sysconfig.get_paths()"
                           "['purelib'])"], capture_output=True, text=True, check=True)
    Path(site.stdout.strip(), "borrowed.pth").write_text(sysconfig.get_paths()["purelib"] + "\n")
    installed = subprocess.run([sys.executable, "-m", "pip", "--python", str(python), "install",
                                "--no-deps", "--no-index", "-q", str(wheel)],
                               capture_output=True, text=True)
    assert installed.returncode == 0, installed.stderr[-2000:]
    work = base / "elsewhere"
    work.mkdir()
    environ = {**os.environ, "TABPAR_CACHE": str(base / "cache"),
               "TABPAR_LEADERBOARDS": str(base / "boards")}
    environ.pop("PYTHONPATH", None)
    return {"bin": env_dir / "bin", "cwd": work, "env": environ, "wheel": wheel}


def _tabpar(wheel_env, *args):
    return subprocess.run([str(wheel_env["bin"] / "tabpar"), *args], cwd=wheel_env["cwd"],
                          env=wheel_env["env"], capture_output=True, text=True, timeout=300)


def test_wheel_carries_suites_and_references(wheel_env):
    import zipfile

    names = set(zipfile.ZipFile(wheel_env["wheel"]).namelist())
    for needed in ("tabpar/builtin/suites/default.toml", "tabpar/builtin/suites/quick.toml",
                   "tabpar/builtin/results/reference/quick/run.json",
                   "tabpar/builtin/results/reference/default/jobs.jsonl", "tabpar/py.typed"):
        assert needed in names
    assert not any(n.startswith("harness/") for n in names)


def test_installed_wheel_lists_suites_and_places_a_score(wheel_env):
    where = subprocess.run([str(wheel_env["bin"] / "python"), "-c",
                            "import tabpar; print(tabpar.__file__)"], cwd=wheel_env["cwd"],
                           env=wheel_env["env"], capture_output=True, text=True)
    assert str(wheel_env["bin"].parent) in where.stdout, where.stderr  # the wheel's copy
    suites = _tabpar(wheel_env, "suites")
    assert suites.returncode == 0, suites.stderr
    assert "quick" in suites.stdout and "diamonds" in suites.stdout
    placed = _tabpar(wheel_env, "place", "diamonds", "--score", "0.1", "--reference", "quick")
    assert placed.returncode == 0, placed.stderr
    assert placed.stdout.startswith("diamonds: rmsle 0.1")


def test_reference_build_refuses_the_installed_package(wheel_env):
    package = subprocess.run([str(wheel_env["bin"] / "python"), "-c",
                              "import tabpar, pathlib; print(pathlib.Path(tabpar.__file__)"
                              ".parent / 'builtin' / 'results' / 'reference' / 'quick')"],
                             cwd=wheel_env["cwd"], env=wheel_env["env"], capture_output=True,
                             text=True, check=True).stdout.strip()
    refused = _tabpar(wheel_env, "reference", "build", "--suite", "quick", "--out", package)
    assert refused.returncode == 2
    assert "inside the installed tabpar package" in refused.stderr
