"""The demo runs end to end, and the README's example session stays true."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import vicino
from vicino import demo

ROOT = Path(__file__).resolve().parents[3]


def test_demo_writes_its_tables_and_finds_the_remote_islands(tmp_path, capsys):
    tables = demo.run(tmp_path, permutations=99)
    out = capsys.readouterr().out
    for name in ("settlements", "neighbour_counts", "candidates", "lags", "moran"):
        assert (tmp_path / f"{name}.csv").stat().st_size > 0
    places = tables["settlements"]
    # reference: numpy brute force on the generated coordinates; a settlement is an
    # island under the 15 km band when no other one lies within 15 km
    xy = places[["x", "y"]].to_numpy()
    d = np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(-1))
    np.fill_diagonal(d, np.inf)
    expected_islands = set(places.index[(d > 15.0).all(axis=1)])
    skerries = set(places.index[places["region"] == "Tarrow Skerries"])
    assert skerries <= expected_islands  # the scenario promises a remote cluster of islands
    assert int(tables["candidates"].loc["within 15 km", "islands"]) == len(expected_islands)
    # reference: the k-nearest candidates leave nobody out (k < n)  # common practice
    assert int(tables["candidates"].loc["6 nearest", "islands"]) == 0
    csv = pd.read_csv(tmp_path / "moran.csv", index_col=0)
    assert list(csv.index) == ["6 nearest", "10 nearest", "within 15 km"]
    assert "Cautions" in out and "not evidence of a cause" in out


def test_command_line_demo_runs(tmp_path):
    r = subprocess.run([sys.executable, "-m", "vicino", "demo", "--out", str(tmp_path), "--permutations", "19"],
                       capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert "Moran's I" in r.stdout and (tmp_path / "moran.csv").exists()


def test_readme_session_runs_and_its_shown_output_is_true():
    text = (ROOT / "README.md").read_text()
    block = re.search(r"## A short session\n\n```python\n(.*?)```", text, re.S)
    if block is None:
        pytest.skip("README has no example session")
    code = block.group(1)
    shown = [line[2:] for line in code.splitlines() if line.startswith("# ")]
    runnable = "\n".join(line for line in code.splitlines() if not line.startswith("# ") and line.strip() != "w")
    scope: dict = {}
    exec(compile(runnable, "README.md", "exec"), scope)
    # reference: the repr lines printed in the README are what the code shows
    assert repr(scope["w"]).splitlines() == shown
    # reference: scipy product for the lag column the README adds
    w = scope["wr"]
    towns = scope["towns"]
    np.testing.assert_allclose(towns["income_lag"].to_numpy(), w.to_scipy() @ towns["income"].to_numpy(), rtol=1e-12)
