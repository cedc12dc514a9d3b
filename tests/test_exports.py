"""Tests for atlas.exports: the thresholds as Python, C, JSON and CSV, checked against the engine.

The committed example (outputs/exports/, written by build_scripts/build_exports.py from the
embedded atlas, normal_cc, interval, tol 0.01) is imported as Python and compiled as C with the
system compiler; both are run on 100,000 random (n, p) off the grid and compared with the engine
(atlas.worst_error with its accuracy) at every pair: none called safe may exceed tol, and the
share of safe pairs called unsafe (what the bands give away) is measured and printed.
"""

import csv
import importlib.util
import io
import json
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from atlas import Atlas, build_atlas, open_atlas, save_atlas, worst_error
from atlas.cli import main
from atlas.exports import export_text, format_for, merged_bands, write_export
from atlas.guarantees import threshold_bands

ROOT = Path(__file__).resolve().parent.parent
EXAMPLE = ROOT / "outputs" / "exports" / "within_tolerance_normal_cc_interval_0_01"
DRIVER = """#include <stdio.h>
int within_tolerance(long long n, double p);
int main(void)
{
    long long n;
    double p;
    while (scanf("%lld %lf", &n, &p) == 2)
        putchar('0' + within_tolerance(n, p));
    return 0;
}
"""


def _import(path):
    spec = importlib.util.spec_from_file_location(f"export_{abs(hash(str(path)))}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _compiler():
    return shutil.which("cc") or shutil.which("gcc") or shutil.which("clang")


def _run_c(source, n, p, tmp_path):
    """Compile ``source`` with a driver and return its answers at (n, p) as a bool array."""
    compiler = _compiler()
    if compiler is None:
        pytest.skip("no C compiler (cc, gcc or clang) on PATH: the C export is not compiled")
    (tmp_path / "driver.c").write_text(DRIVER)
    program = tmp_path / "within"
    subprocess.run([compiler, "-std=c99", "-O1", "-Wall", "-Wextra", "-Werror", str(source),
                    str(tmp_path / "driver.c"), "-o", str(program)], check=True)  # fmt: skip
    text = "".join(f"{a} {b!r}\n" for a, b in zip(n.tolist(), p.tolist(), strict=True))
    out = subprocess.run([str(program)], input=text, capture_output=True, text=True, check=True)
    assert len(out.stdout) == n.size
    return np.frombuffer(out.stdout.encode(), dtype=np.uint8) == ord("1")


def _sample(module, atlas, rng, count_n=500, per_n=200):
    """Random (n, p) off the grid: n log-uniform to the atlas's end (not a grid n above its
    dense part), half of each n's p uniform in log-odds over the p range, half in the bands
    whose threshold is within a factor 2 of n (where a wrong answer would sit)."""
    edges, n_min = np.array(module.EDGES), np.array(module.N_MIN)
    grid_n = set(atlas.n.tolist())
    ns = []
    while len(ns) < count_n:
        n = int(np.exp(rng.uniform(0.0, np.log(atlas.n[-1]))))
        if n > atlas.dense_n and n in grid_n:
            continue
        ns.append(n)
    lo, hi = np.log(edges[0] / (1 - edges[0])), np.log(edges[-1] / (1 - edges[-1]))
    all_n, all_p, all_near = [], [], []
    for n in ns:
        x = rng.uniform(lo, hi, per_n)
        flag = np.zeros(per_n, dtype=bool)
        near = np.flatnonzero((n_min > 0) & (n_min <= 2 * n) & (2 * n_min >= n))
        if near.size:
            j = rng.choice(near, per_n // 2)
            a, b = edges[j], edges[j + 1]
            x[: per_n // 2] = rng.uniform(np.log(a / (1 - a)), np.log(b / (1 - b)))
            flag[: per_n // 2] = True
        p = 1.0 / (1.0 + np.exp(-x))
        off = ~np.isin(p, atlas.p)
        all_n.append(np.full(int(off.sum()), n))
        all_p.append(p[off])
        all_near.append(flag[off])
    return np.concatenate(all_n), np.concatenate(all_p), np.concatenate(all_near)


def test_example_never_calls_an_unsafe_pair_safe(tmp_path, capsys):
    module = _import(EXAMPLE.with_suffix(".py"))
    assert (module.METHOD, module.METRIC, module.TOL) == ("normal_cc", "interval", 0.01)
    atlas = open_atlas()
    n, p, near = _sample(module, atlas, np.random.default_rng(2026))
    assert n.size >= 99_000  # 500 n x 200 p, less any p that fell on the grid (none expected)
    called = np.array([module.within_tolerance(a, b) for a, b in zip(n.tolist(), p.tolist(),
                                                                     strict=True)])  # fmt: skip
    assert np.array_equal(_run_c(EXAMPLE.with_suffix(".c"), n, p, tmp_path), called)
    err = worst_error(n, p, method="normal_cc", return_accuracy=True)
    unsafe = err.error + err.accuracy > module.TOL  # unsafe, or too close to tol to tell
    bad = called & unsafe
    assert not bad.any(), list(zip(n[bad], p[bad], strict=True))
    safe = err.error <= module.TOL
    given_away = float((safe & ~called).sum() / safe.sum())
    uniform = float((safe & ~called & ~near).sum() / (safe & ~near).sum())
    with capsys.disabled():
        print(f"\nexport normal_cc 0.01: {n.size:,} random off-grid pairs, {int(safe.sum()):,} "
              f"safe, {int(called.sum()):,} called safe, none unsafe; safe pairs called "
              f"unsafe: {given_away:.2%} (of the half drawn uniformly in log-odds: "
              f"{uniform:.2%})")  # fmt: skip
    assert 0.0 < given_away < 0.2  # an export that refused everything would give away all


@pytest.fixture(scope="module")
def small():
    return Atlas(build_atlas(n="1:300", p="0.2,0.3,0.4,0.5,0.6,0.7,0.8", methods="normal_cc",
                             progress=False))  # fmt: skip


@pytest.fixture(scope="module")
def bands(small):
    return threshold_bands(small, 0.01)


def test_every_format_says_the_same(bands, tmp_path):
    rng = np.random.default_rng(7)
    n = rng.integers(1, 2000, 5000)
    p = rng.uniform(0.1, 0.9, 5000)
    p[:4] = [0.2, 0.5, 0.8, float("nan")]  # band edges and the axis ends are inside; NaN not
    expected = bands.within(n, p)
    python = _import(write_export(bands, tmp_path / "lookup.py"))
    assert [
        python.within_tolerance(a, b) for a, b in zip(n.tolist(), p.tolist(), strict=True)
    ] == expected.tolist()
    assert np.array_equal(_run_c(write_export(bands, tmp_path / "lookup.c"), n, p, tmp_path),
                          expected)  # fmt: skip
    record = json.loads((write_export(bands, tmp_path / "lookup.json")).read_text())
    rows = list(csv.reader(io.StringIO(
        "".join(x for x in (write_export(bands, tmp_path / "lookup.csv")).read_text()
                .splitlines(keepends=True) if not x.startswith("#")))))  # fmt: skip
    edges, n_min, n_max = merged_bands(bands)
    assert [b["n_min"] or 0 for b in record["bands"]] == n_min
    assert [int(r[2] or 0) for r in rows[1:]] == n_min and rows[0] == [
        "p_lo",
        "p_hi",
        "n_min",
        "n_max",
    ]
    assert [float(r[0]) for r in rows[1:]] == edges[:-1]
    assert record["atlas"]["checksum"] == bands.atlas_checksum and "caution" in record
    assert sorted(x.name for x in tmp_path.iterdir() if x.name.startswith(".")) == []


def test_generated_python_imports_only_the_standard_library(bands):
    text = export_text(bands, "python", date="2026-01-01")
    imports = [line for line in text.splitlines() if line.startswith(("import ", "from "))]
    assert imports == ["from bisect import bisect_right", "from operator import index"]
    assert "2026-01-01" in text and bands.atlas_checksum in text and "Caution:" in text
    space = {}
    exec(text, space)
    with pytest.raises(TypeError):
        space["within_tolerance"](10.5, 0.5)
    assert space["within_tolerance"](10**9, 0.5) is True  # beyond the end: Berry-Esseen
    assert space["within_tolerance"](10**9, 0.1) is False  # outside the p range


def test_format_errors():
    assert format_for(None, "x.C") == "c"
    with pytest.raises(ValueError, match="`format` must be one of 'python', 'c', 'json', 'csv'"):
        format_for("rust")
    with pytest.raises(ValueError, match="`format` must be given for a file not ending in"):
        format_for(None, "x.txt")


def test_cli_export(small, tmp_path, capsys):
    path = tmp_path / "small.nc"
    save_atlas(small.dataset, path)
    out = tmp_path / "lookup.py"
    args = ["export", "--tol", "0.01", "--method", "normal_cc", "--atlas", str(path), "-o",
            str(out)]  # fmt: skip
    assert main(args) == 0 and capsys.readouterr().out.strip() == str(out)
    assert _import(out).within_tolerance(40, 0.5)
    assert main(args) == 2  # exists: refused before any work
    assert capsys.readouterr().err.startswith("approx-atlas: error: ")
    assert main([*args, "--force", "--format", "rust"]) == 2
    err = capsys.readouterr().err
    assert err == ("approx-atlas: error: `--format` must be one of 'python', 'c', 'json', "
                   "'csv'; got 'rust'.\n")  # fmt: skip
    assert main([*args, "--force", "--metric", "bogus"]) == 2
    assert "`--metric` must be one of" in capsys.readouterr().err
