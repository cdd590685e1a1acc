"""Ctrl-C stops long core calls: KeyboardInterrupt within about a second, not at the end of the run.

Each case runs in a fresh Python process that sends itself SIGINT one second
into a call that would take far longer, and reports what happened.
"""

from __future__ import annotations

import json
import signal
import subprocess
import sys
import textwrap

import pytest

pytestmark = pytest.mark.skipif(not hasattr(signal, "SIGALRM"), reason="needs POSIX signals")

RUNNER = """
import json, os, signal, threading, time
import numpy as np, scipy.sparse as sp, vicino
{setup}
threading.Timer(1.0, lambda: os.kill(os.getpid(), signal.SIGINT)).start()
start = time.perf_counter()
try:
    {call}
    outcome = "finished"
except KeyboardInterrupt:
    outcome = "interrupted"
print(json.dumps({{"outcome": outcome, "seconds": time.perf_counter() - start}}))
"""

CASES = {
    # 100,000 permutations of 200,000 units take minutes
    "permutations": (
        "xy = np.random.default_rng(0).random((200_000, 2)); w = vicino.k_nearest(xy, 8).standardize('row')",
        "vicino.moran(xy[:, 0], w, permutations=100_000, seed=1)",
    ),
    # a long weighted directed cycle with one chord (a simple cycle has a closed form):
    # the power iteration runs to its limit (many seconds)
    "spectral radius": (
        "n = 400_000; i = np.arange(n)\n"
        "a = sp.csr_array((1.0 + (i % 3), (i, (i + 1) % n)), shape=(n, n))\n"
        "w = vicino.from_matrix(a + sp.csr_array(([0.5], ([0], [n // 2])), shape=(n, n)))",
        "w.spectral_radius()",
    ),
}


@pytest.mark.slow
@pytest.mark.parametrize("case", sorted(CASES))
def test_ctrl_c_interrupts_a_long_call(case):
    setup, call = CASES[case]
    code = textwrap.dedent(RUNNER).format(setup=setup, call=call)
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout.strip().splitlines()[-1])
    assert report["outcome"] == "interrupted"
    # the signal came 1 s in; the call polls for it every 50 ms and the core checks between blocks of work
    assert report["seconds"] < 10, report
