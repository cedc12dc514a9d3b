"""Tests for atlas.checkpoint: finished chunks kept on disk, resumes, refusals, kill -9."""

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import atlas
from atlas.build import build_atlas
from atlas.checkpoint import _HOST, MANIFEST, CheckpointStore
from atlas.chunks import compute_chunk, plan_chunks
from atlas.grid import parse_n, parse_p

REPO = Path(atlas.__file__).resolve().parents[1]
METHODS = ("normal_cc", "poisson")
N_SPEC, P_SPEC = "1:12,log:20:5000:4", "0.1,0.5,0.9"
COST = 1000  # about six n per chunk on this grid: several chunks from a tiny build


def _grid():
    return parse_n(N_SPEC), parse_p(P_SPEC)


def _assert_same_cube(a, b):
    for name in a.data_vars:
        assert np.array_equal(a[name].values, b[name].values), name
    assert a.attrs["checksum"] == b.attrs["checksum"]


def _build(directory=None, **kwargs):
    options = {"methods": METHODS, "progress": False, "chunk_cost": COST} | kwargs
    return build_atlas(N_SPEC, P_SPEC, checkpoint=directory, **options)


def _files(directory):
    """The chunk files and their (inode, mtime) stamps: a rewritten file gets a new inode."""
    return {p.name: (p.stat().st_ino, p.stat().st_mtime_ns) for p in directory.glob("chunk-*.npz")}


@pytest.fixture(scope="module")
def reference():
    """The build without a checkpoint."""
    return _build()


# ---- the store itself ----


def test_save_then_load_gives_the_same_arrays(tmp_path):
    n, p = _grid()
    chunks = plan_chunks(n, p, cost=COST)
    store = CheckpointStore.open(tmp_path / "ck", n, p, METHODS, chunks)
    chunk = chunks[1]
    part = compute_chunk(n[chunk.n_start : chunk.n_stop], p[chunk.p_start : chunk.p_stop], METHODS)
    assert store.load(chunk) is None
    path = store.save(chunk, part)
    assert path.name == f"chunk-{chunk.index:06d}.npz"
    got = store.load(chunk)
    assert set(got) == set(part)
    assert {"interval_accuracy", "cdf_accuracy"} <= set(got)  # schema 3 keeps the accuracies
    for name in part:
        assert got[name].dtype == part[name].dtype
        assert np.array_equal(got[name], part[name])
    assert store.completed() == [chunk.index]
    # No temporary file is left beside the finished ones.
    assert sorted(e.name for e in store.directory.iterdir()) == sorted([MANIFEST, path.name])


def test_checkpoint_of_an_older_schema_is_refused(tmp_path, monkeypatch):
    # A directory made by a schema-2 build (chunks without the accuracy arrays) is not mixed
    # into a schema-3 build: the fingerprint holds the schema.
    from atlas import store as atlas_store

    n, p = _grid()
    chunks = plan_chunks(n, p, cost=COST)
    monkeypatch.setattr(atlas_store, "SCHEMA_VERSION", "2")
    CheckpointStore.open(tmp_path / "ck", n, p, METHODS, chunks)
    monkeypatch.undo()
    with pytest.raises(ValueError, match=r"was made for another build; refusing to mix results\. "
                                         r"Its schema \(directory: atlas schema 2, "):  # fmt: skip
        CheckpointStore.open(tmp_path / "ck", n, p, METHODS, chunks)


def test_manifest_records_the_build(tmp_path):
    n, p = _grid()
    chunks = plan_chunks(n, p, cost=COST)
    store = CheckpointStore.open(tmp_path, n, p, METHODS, chunks)
    manifest = json.loads((tmp_path / MANIFEST).read_text())
    assert manifest["fingerprint"] == store.fingerprint
    assert manifest["fingerprint"].startswith("sha256:")
    assert manifest["parts"]["methods"] == list(METHODS)
    assert manifest["chunks"] == len(chunks)
    # Opening again with the same build is accepted and gives the same fingerprint.
    again = CheckpointStore.open(tmp_path, n, p, METHODS, chunks)
    assert again.fingerprint == store.fingerprint


def test_resume_computes_only_missing_chunks(tmp_path, reference):
    first = _build(tmp_path)
    _assert_same_cube(first, reference)
    stamps = _files(tmp_path)
    total = len(plan_chunks(*_grid(), cost=COST))
    assert len(stamps) == total > 3
    # A complete directory: the rerun computes nothing and rewrites no file.
    _assert_same_cube(_build(tmp_path), reference)
    assert _files(tmp_path) == stamps
    # Two chunks lost: exactly those two are computed and written again.
    lost = sorted(stamps)[1:3]
    for name in lost:
        (tmp_path / name).unlink()
    _assert_same_cube(_build(tmp_path), reference)
    after = _files(tmp_path)
    assert set(after) == set(stamps)
    assert [name for name in after if after[name] != stamps[name]] == lost


def _flip_middle_byte(path):
    data = bytearray(path.read_bytes())
    data[len(data) // 2] ^= 0xFF
    path.write_bytes(bytes(data))


@pytest.mark.parametrize(
    ("damage", "why"),
    [
        (lambda path: path.write_bytes(path.read_bytes()[:100]), "ValueError: it is not an .npz"),
        (lambda path: path.write_bytes(b"not a zip file"), "ValueError: it is not an .npz"),
        (_flip_middle_byte, ""),  # zlib, zipfile's CRC-32 or the SHA-256 check: any of them
    ],
    ids=["truncated", "garbage", "flipped-byte"],
)
def test_damaged_chunk_is_recomputed_with_a_warning(tmp_path, reference, damage, why):
    _build(tmp_path)
    victim = tmp_path / "chunk-000002.npz"
    damage(victim)
    with pytest.warns(RuntimeWarning, match=rf"chunk-000002\.npz' is damaged \({why}"):
        resumed = _build(tmp_path)
    _assert_same_cube(resumed, reference)
    n, p = _grid()
    chunks = plan_chunks(n, p, cost=COST)
    assert CheckpointStore.open(tmp_path, n, p, METHODS, chunks).load(chunks[2]) is not None


def test_chunk_file_of_another_chunk_is_refused(tmp_path, reference):
    _build(tmp_path)
    (tmp_path / "chunk-000000.npz").write_bytes((tmp_path / "chunk-000001.npz").read_bytes())
    with pytest.warns(RuntimeWarning, match=r"chunk-000000\.npz' is damaged .*are not chunk"):
        resumed = _build(tmp_path)
    _assert_same_cube(resumed, reference)


def test_leftover_temporary_file_of_a_dead_writer_is_removed(tmp_path):
    n, p = _grid()
    chunks = plan_chunks(n, p, cost=COST)
    store = CheckpointStore.open(tmp_path, n, p, METHODS, chunks)
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True, timeout=60)  # fmt: skip
    name = store.chunk_path(chunks[0]).name
    # Temporary names are .<name>.<host>.<pid>.<random>.tmp (see atlas.checkpoint._write_atomic).
    stale = tmp_path / f".{name}.{_HOST}.{int(dead.stdout)}.abc123.tmp"
    live = tmp_path / f".{name}.{_HOST}.{os.getpid()}.def456.tmp"
    stale.write_bytes(b"half")
    live.write_bytes(b"in progress")
    CheckpointStore.open(tmp_path, n, p, METHODS, chunks)
    assert not stale.exists()
    assert live.exists()


# ---- refusals ----


def test_other_grid_is_refused(tmp_path):
    _build(tmp_path)
    with pytest.raises(ValueError, match=r"`checkpoint` directory '.*' was made for another build"):
        build_atlas("1:13", P_SPEC, methods=METHODS, checkpoint=tmp_path, progress=False)
    with pytest.raises(ValueError, match=r"Its grid \(directory: 16 n from 1 to 5000 x 3 p"):
        build_atlas(N_SPEC, "0.1,0.5", methods=METHODS, checkpoint=tmp_path, progress=False)


def test_other_methods_are_refused(tmp_path):
    _build(tmp_path)
    message = (
        r"Its methods \(directory: normal_cc, poisson; this build: normal_cc\)\. "
        r"Use another directory, or remove this one\."
    )
    with pytest.raises(ValueError, match=message):
        _build(tmp_path, methods=("normal_cc",))


def test_the_same_methods_in_another_order_resume(tmp_path, reference):
    # The cube stores its approximations in alphabetical order, so the order they are asked for
    # in does not make another build: every chunk is loaded, none recomputed (files untouched).
    _build(tmp_path)
    before = _files(tmp_path)
    again = _build(tmp_path, methods=tuple(reversed(METHODS)))
    assert _files(tmp_path) == before
    xr.testing.assert_identical(again.drop_attrs(), reference.drop_attrs())


def test_other_chunking_is_refused(tmp_path):
    _build(tmp_path)
    message = (
        r"Its chunking \(directory: \d+ chunks; this build: \d+ chunks; "
        r"rerun with the same p_block and chunk_cost\)"
    )
    with pytest.raises(ValueError, match=message):
        _build(tmp_path, p_block=1)
    # Another grid has another plan too: the message names the grid alone.
    with pytest.raises(ValueError, match=r"Its grid \([^)]*\)\. Use another directory"):
        build_atlas("1:40", P_SPEC, methods=METHODS, checkpoint=tmp_path, progress=False)


def test_non_empty_directory_without_manifest_is_refused(tmp_path):
    (tmp_path / "notes.txt").write_text("an inspection log")
    message = (
        r"`checkpoint` must be a new or empty directory, or one made by an earlier run of the "
        r"same build; '.*' holds notes\.txt and no manifest\.json\."
    )
    with pytest.raises(ValueError, match=message):
        _build(tmp_path)
    assert not (tmp_path / MANIFEST).exists()


def test_file_in_place_of_directory_is_refused(tmp_path):
    target = tmp_path / "plain"
    target.write_text("x")
    with pytest.raises(
        ValueError, match=r"`checkpoint` must be a directory; got a file: '.*plain'"
    ):
        _build(target)


def test_unreadable_manifest_is_refused(tmp_path):
    _build(tmp_path)
    (tmp_path / MANIFEST).write_text("{ half")
    with pytest.raises(ValueError, match=r"has an unreadable manifest\.json \(JSONDecodeError"):
        _build(tmp_path)


# ---- kill -9 ----

# A build of about twenty chunks of 0.1 to 0.3 s each, so that the kill lands mid-build.
KILL_N, KILL_P, KILL_COST = "1:200,log:300:1000000:20", "logit:0.01:0.99:17,0.5", 4e4
_KILL_SCRIPT = textwrap.dedent(
    """
    import sys
    from atlas.build import build_atlas
    from atlas.cube import save_atlas
    ds = build_atlas({n!r}, {p!r}, checkpoint=sys.argv[1], chunk_cost={cost!r}, progress=False)
    save_atlas(ds, sys.argv[2])
    """
).format(n=KILL_N, p=KILL_P, cost=KILL_COST)


def test_build_killed_with_sigkill_resumes_to_the_same_cube(tmp_path):
    directory, output = tmp_path / "ck", tmp_path / "atlas.nc"
    env = dict(
        os.environ, PYTHONPATH=os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    )
    proc = subprocess.Popen(
        [sys.executable, "-c", _KILL_SCRIPT, str(directory), str(output)],
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
    )
    try:
        deadline = time.monotonic() + 60
        while not list(directory.glob("chunk-*.npz")):
            assert proc.poll() is None, proc.stderr.read().decode()
            assert time.monotonic() < deadline, "no chunk was checkpointed within 60 s"
            time.sleep(0.01)
        proc.send_signal(signal.SIGKILL)
        assert proc.wait(timeout=30) == -signal.SIGKILL
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(timeout=30)
        proc.stderr.close()
    # No output file, and no half-written one beside it.
    assert sorted(e.name for e in tmp_path.iterdir()) == ["ck"]
    total = len(plan_chunks(parse_n(KILL_N), parse_p(KILL_P), cost=KILL_COST))
    kept = _files(directory)
    assert 1 <= len(kept) < total
    resumed = build_atlas(
        KILL_N, KILL_P, checkpoint=directory, chunk_cost=KILL_COST, progress=False
    )
    # The chunks finished before the kill were loaded, not computed again: their files are the
    # same files; every other chunk was computed once and written.
    after = _files(directory)
    assert len(after) == total
    assert all(after[name] == stamp for name, stamp in kept.items())
    assert not [e.name for e in directory.iterdir() if e.name.endswith(".tmp")]
    # The reference is built in one piece: the chunking does not change a value either.
    _assert_same_cube(resumed, build_atlas(KILL_N, KILL_P, progress=False))
