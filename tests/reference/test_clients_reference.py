"""Real clients read the files vicino writes: R's Matrix::readMM and GNU Octave's spconvert.

Each client loads the exported weights and their ids, computes the spatial lag
of a vector and writes it back with 17 significant digits; it must equal
vicino's lag to 1e-12. Under CI (CI=true) these tests run and fail when a
client is missing; elsewhere they skip with the command that installs it.
The R and Octave lines here are the ones the README shows.
"""

from __future__ import annotations

import os
import shutil
import subprocess

import numpy as np
import pandas as pd
import pytest

import vicino

IN_CI = os.environ.get("CI", "").lower() == "true"

R_SCRIPT = r"""
args <- commandArgs(trailingOnly = TRUE)
library(Matrix)
W <- readMM(args[1])
ids <- read.csv(args[2], colClasses = "character")[[1]]
x <- read.csv(args[3], colClasses = c("character", "numeric"))
stopifnot(identical(x$id, ids))
lag <- as.vector(W %*% x$value)
write.csv(data.frame(id = ids, lag = sprintf("%.17g", lag)), args[4], row.names = FALSE, quote = FALSE)
"""

OCTAVE_SCRIPT = r"""
W = spconvert(load("{weights}"));
f = fopen("{ids}"); c = textscan(f, "%s", "HeaderLines", 1, "Delimiter", "\n"); fclose(f); ids = c{{1}};
x = load("{values}");
lag = W * x;
fid = fopen("{out}", "w"); fprintf(fid, "%.17g\n", lag); fclose(fid);
printf("%d units, first id %s\n", numel(ids), ids{{1}});
"""


def client(name: str, package: str) -> str:
    path = shutil.which(name)
    if path is None:
        message = f"{name} is not installed: sudo apt-get install {package}"
        if IN_CI:
            pytest.fail(f"under CI the real clients must run; {message}")
        pytest.skip(message)
    return path


def sample(n: int = 60) -> tuple[vicino.Weights, np.ndarray]:
    rng = np.random.default_rng(2024)
    xy = rng.random((n, 2))
    xy[-1] = [5.0, 5.0]  # the last unit lies far from the others: an island in the last row
    w = vicino.within_distance(xy, 0.18, ids=[f"ward {i:02d}" for i in range(n)])
    w = w.standardize("row", islands="keep")  # islands keep empty rows, also at the end
    return w, rng.normal(10, 3, n)


def test_r_matrix_reads_the_matrix_market_file(tmp_path):
    rscript = client("Rscript", "r-base-core r-cran-matrix")
    w, x = sample()
    path = w.write(tmp_path / "w.mtx")
    pd.DataFrame({"id": w.ids, "value": [repr(float(v)) for v in x]}).to_csv(tmp_path / "x.csv", index=False)
    script = tmp_path / "lag.R"
    script.write_text(R_SCRIPT)
    out = tmp_path / "lag_r.csv"
    done = subprocess.run(
        [rscript, str(script), str(path), str(tmp_path / "w.mtx.ids.csv"), str(tmp_path / "x.csv"), str(out)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr
    got = pd.read_csv(out, dtype={"id": str})
    assert list(got["id"]) == list(w.ids)  # R read the ids in row order
    np.testing.assert_allclose(got["lag"], w.lag(x), rtol=0, atol=1e-12)  # reference: R Matrix %*%


def test_octave_reads_the_triplet_file(tmp_path):
    octave = client("octave-cli", "octave")
    w, x = sample()
    assert w.ids[-1] in set(w.islands)  # so only the closing n n 0 line keeps the last row
    path = w.write(tmp_path / "w.txt")
    np.savetxt(tmp_path / "x.txt", x, fmt="%.17g")
    out = tmp_path / "lag_octave.txt"
    code = OCTAVE_SCRIPT.format(weights=path, ids=tmp_path / "w.txt.ids.csv", values=tmp_path / "x.txt", out=out)
    done = subprocess.run(
        [octave, "--no-window-system", "--norc", "--quiet", "--eval", code],
        capture_output=True,
        text=True,
        timeout=180,
    )
    assert done.returncode == 0, done.stderr
    assert f"{w.n} units, first id {w.ids[0]}" in done.stdout
    got = np.loadtxt(out)
    assert got.shape == (w.n,)  # the closing n n 0 line kept every row, trailing islands included
    np.testing.assert_allclose(got, w.lag(x), rtol=0, atol=1e-12)  # reference: Octave spconvert and W * x


def test_trailing_islands_need_the_closing_line(tmp_path):
    # without the closing line spconvert would make a 2 x 2 matrix of this 3-unit one
    octave = client("octave-cli", "octave")
    w = vicino.from_matrix(np.array([[0, 1, 0], [1, 0, 0], [0, 0, 0]], dtype=float), ids=["a", "b", "c"])
    path = w.write(tmp_path / "w.txt")
    code = f'W = spconvert(load("{path}")); printf("%d %d\\n", size(W, 1), size(W, 2));'
    done = subprocess.run(
        [octave, "--no-window-system", "--norc", "--quiet", "--eval", code], capture_output=True, text=True, timeout=180
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout.split()[:2] == ["3", "3"]  # reference: Octave spconvert keeps the island row


def test_the_readme_shows_the_lines_these_tests_run():
    from pathlib import Path

    readme = (Path(__file__).parents[2] / "README.md").read_text()
    for line in ('W <- readMM("w.mtx")', 'ids <- read.csv("w.mtx.ids.csv", colClasses = "character")[[1]]'):
        assert line.replace('"w.mtx"', "args[1]").replace('"w.mtx.ids.csv"', "args[2]") in R_SCRIPT
        assert line in readme
    octave = OCTAVE_SCRIPT.format(weights="w.txt", ids="w.txt.ids.csv", values="", out="")
    for line in ('W = spconvert(load("w.txt"));', 'f = fopen("w.txt.ids.csv"); c = textscan('):
        assert line in octave and line in readme
