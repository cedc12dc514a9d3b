"""Checkpoints of a build: each finished chunk kept in a directory, so a rerun resumes.

A checkpoint directory holds

- ``manifest.json``: what the directory is for (the grid, the methods, the chunk plan, the
  atlas schema and package version) and the fingerprint, a SHA-256 over all of these;
- ``chunk-<index>.npz``: the arrays of one finished chunk, its cells and the fingerprint, with
  a SHA-256 of the arrays.

Every file is written to a temporary name in the directory, flushed to disk (``fsync``) and
renamed over its final name, so a build killed at any moment, even by SIGKILL, leaves only
complete files and hidden ``.tmp`` leftovers, which the next :meth:`CheckpointStore.open`
removes. A directory made for another build (another grid, method list, chunk plan or engine
version) is refused, so results of two builds are never mixed. A chunk file that cannot be
read or fails its checks is treated as missing (with a warning) and computed again.
"""

import hashlib
import json
import os
import socket
import tempfile
import warnings
import zipfile
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from atlas import __version__
from atlas.notation import format_p

__all__ = ["CheckpointStore", "MANIFEST", "fingerprint_parts"]

MANIFEST = "manifest.json"
FORMAT = "approx-atlas checkpoint"
FORMAT_VERSION = 2  # 2: chunk files hold interval_accuracy and cdf_accuracy too
_ARRAYS = {
    "interval_error": np.dtype(np.float64),
    "cdf_error": np.dtype(np.float64),
    "interval_lo": np.dtype(np.int64),
    "interval_hi": np.dtype(np.int64),
    "interval_accuracy": np.dtype(np.float64),
    "cdf_accuracy": np.dtype(np.float64),
}
_HOST = socket.gethostname().replace(".", "_")


def _sha256(*blobs):
    digest = hashlib.sha256()
    for blob in blobs:
        digest.update(blob)
    return "sha256:" + digest.hexdigest()


def _cells(chunk):
    """The chunk's index and bounds, as stored in its file and in the chunk plan."""
    return np.array(
        [chunk.index, chunk.n_start, chunk.n_stop, chunk.p_start, chunk.p_stop], dtype="<i8"
    )


def fingerprint_parts(n, p, methods, chunks):
    """The parts of a build that a checkpoint directory is bound to.

    Parameters
    ----------
    n, p : numpy.ndarray
        The grid axes (int64 and float64).
    methods : sequence of str
        The methods, in order.
    chunks : sequence of atlas.chunks.Chunk
        The chunk plan.

    Returns
    -------
    dict
        ``grid`` (SHA-256 of the axes' little-endian bytes), ``methods`` (the list),
        ``chunking`` (SHA-256 of every chunk's index and bounds) and ``schema`` (the atlas
        schema and package version, which fix the engine).
    """
    from atlas.store import SCHEMA_VERSION

    n_bytes = np.ascontiguousarray(n, dtype="<i8").tobytes()
    p_bytes = np.ascontiguousarray(p, dtype="<f8").tobytes()
    plan = np.concatenate([_cells(c) for c in chunks]) if len(chunks) else np.empty(0, "<i8")
    return {
        "grid": _sha256(b"n", n_bytes, b"p", p_bytes),
        "methods": list(methods),
        "chunking": _sha256(plan.tobytes()),
        "schema": f"atlas schema {SCHEMA_VERSION}, approx-atlas {__version__}",
    }


def _fingerprint(parts):
    return _sha256(json.dumps(parts, sort_keys=True).encode())


def _grid_summary(n, p):
    def axis(name, values, show):
        if values.size == 1:
            return f"1 {name}, {show(values[0])}"
        return f"{values.size} {name} from {show(values[0])} to {show(values[-1])}"

    return f"{axis('n', n, int)} x {axis('p', p, format_p)}"


def _fsync_directory(directory):
    """Make a rename in `directory` durable (a no-op where directories cannot be opened)."""
    try:
        fd = os.open(directory, os.O_RDONLY)
    except OSError:  # pragma: no cover - e.g. Windows
        return
    try:
        os.fsync(fd)
    except OSError:  # pragma: no cover - file systems that refuse fsync on a directory
        pass
    finally:
        os.close(fd)


def _write_atomic(path, write):
    """Write a file through ``write(file_object)`` to a temporary name, fsync, rename."""
    # The temporary name carries host and pid, so that `open` can tell a dead writer's leftovers.
    fd, tmp = tempfile.mkstemp(
        dir=path.parent, prefix=f".{path.name}.{_HOST}.{os.getpid()}.", suffix=".tmp"
    )
    try:
        with os.fdopen(fd, "wb") as fh:
            write(fh)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    _fsync_directory(path.parent)


def _is_leftover(name):
    return name.startswith(".") and name.endswith(".tmp")


def _writer_alive(name):
    """False if a temporary file was left by a process of this host that no longer runs."""
    parts = name.split(".")
    # .<final name with one dot>.<host>.<pid>.<random>.tmp
    if len(parts) < 7 or parts[-4] != _HOST or not parts[-3].isdigit():
        return True
    pid = int(parts[-3])
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # exists but belongs to someone else
        return True
    return True


class CheckpointStore:
    """A directory of finished chunks of one build.

    Use :meth:`open`; :func:`atlas.build_atlas` does so for ``checkpoint=DIR``.

    Attributes
    ----------
    directory : pathlib.Path
        The checkpoint directory.
    fingerprint : str
        ``"sha256:<hex>"`` over the grid, methods, chunk plan and schema.
    methods : tuple of str
        The build's methods.
    """

    def __init__(self, directory, fingerprint, methods):
        self.directory = Path(directory)
        self.fingerprint = fingerprint
        self.methods = tuple(methods)

    @classmethod
    def open(cls, directory, n, p, methods, chunks):
        """Open (creating if needed) the checkpoint directory of a build.

        Parameters
        ----------
        directory : str or os.PathLike
            The directory; created with its parents if missing. A new directory must be empty.
        n, p : numpy.ndarray
            The grid axes.
        methods : sequence of str
            The methods, in order.
        chunks : sequence of atlas.chunks.Chunk
            The chunk plan (:func:`atlas.chunks.plan_chunks`).

        Returns
        -------
        CheckpointStore

        Raises
        ------
        ValueError
            If the directory was made for another build: the message names the directory and
            what differs (grid, methods, chunking or schema); or if it is a non-empty directory
            without a manifest, or its manifest is unreadable.
        OSError
            If the directory cannot be created or written.

        Notes
        -----
        The fingerprint is SHA-256 of the JSON of :func:`fingerprint_parts`. The chunking is
        part of it because a chunk file is found by its index in the plan: rerun with the same
        ``p_block`` and ``chunk_cost``.

        Examples
        --------
        >>> import tempfile, numpy as np
        >>> from atlas.chunks import plan_chunks
        >>> n, p = np.array([10, 20]), np.array([0.5])
        >>> chunks = plan_chunks(n, p)
        >>> with tempfile.TemporaryDirectory() as tmp:
        ...     store = CheckpointStore.open(tmp, n, p, ("normal_cc",), chunks)
        ...     print(store.load(chunks[0]))
        None
        """
        directory = Path(directory)
        if directory.exists() and not directory.is_dir():
            raise ValueError(f"`checkpoint` must be a directory; got a file: {str(directory)!r}.")
        directory.mkdir(parents=True, exist_ok=True)
        n = np.asarray(n)
        p = np.asarray(p)
        parts = fingerprint_parts(n, p, methods, chunks)
        fingerprint = _fingerprint(parts)
        manifest_path = directory / MANIFEST
        if manifest_path.exists():
            try:
                old = json.loads(manifest_path.read_text(encoding="utf-8"))
                old_print = old["fingerprint"]
                if not isinstance(old["parts"], dict):
                    raise TypeError("its 'parts' is not an object")
            except (OSError, ValueError, KeyError, TypeError) as err:
                raise ValueError(
                    f"`checkpoint` directory {str(directory)!r} has an unreadable {MANIFEST} "
                    f"({type(err).__name__}: {err}); remove the directory or choose another."
                ) from None
            if old_print != fingerprint:
                raise ValueError(_mismatch(directory, old, parts, n, p, len(chunks)))
        else:
            others = [e.name for e in directory.iterdir() if not _is_leftover(e.name)]
            if others:
                shown = ", ".join(sorted(others)[:3]) + (", ..." if len(others) > 3 else "")
                raise ValueError(
                    f"`checkpoint` must be a new or empty directory, or one made by an earlier "
                    f"run of the same build; {str(directory)!r} holds {shown} and no {MANIFEST}."
                )
            manifest = {
                "format": FORMAT,
                "format_version": FORMAT_VERSION,
                "fingerprint": fingerprint,
                "parts": parts,
                "grid_summary": _grid_summary(n, p),
                "chunks": len(chunks),
                "created": datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
            }
            text = json.dumps(manifest, indent=2, sort_keys=True) + "\n"
            _write_atomic(manifest_path, lambda fh: fh.write(text.encode("utf-8")))
        store = cls(directory, fingerprint, methods)
        store._remove_leftovers()
        return store

    def chunk_path(self, chunk):
        """The file of one chunk: ``<directory>/chunk-<index>.npz``."""
        return self.directory / f"chunk-{chunk.index:06d}.npz"

    def completed(self):
        """Indices of the chunks with a file in the directory (unchecked), sorted."""
        found = []
        for path in self.directory.glob("chunk-*.npz"):
            stem = path.stem.removeprefix("chunk-")
            if stem.isdigit():
                found.append(int(stem))
        return sorted(found)

    def load(self, chunk):
        """The arrays of a finished chunk, or None if it has not been saved.

        A file that cannot be read, or whose fingerprint, cells, shapes, dtypes or SHA-256 do
        not match, is treated as missing: a ``RuntimeWarning`` names it and the chunk is
        computed again (and its file rewritten by :meth:`save`).

        Parameters
        ----------
        chunk : atlas.chunks.Chunk

        Returns
        -------
        dict or None
            ``interval_error``, ``cdf_error``, ``interval_lo``, ``interval_hi`` of shape
            (len(methods), n_stop - n_start, p_stop - p_start).
        """
        path = self.chunk_path(chunk)
        if not path.exists():
            return None
        try:
            return self._read(path, chunk)
        except Exception as err:  # a damaged file may fail in zipfile, numpy or our checks
            warnings.warn(
                f"checkpoint file {str(path)!r} is damaged ({type(err).__name__}: {err}); "
                "its chunk will be computed again.",
                RuntimeWarning,
                stacklevel=2,
            )
            return None

    def _read(self, path, chunk):
        shape = (len(self.methods), chunk.n_stop - chunk.n_start, chunk.p_stop - chunk.p_start)
        if not zipfile.is_zipfile(path):
            raise ValueError("it is not an .npz (zip) file")
        with np.load(path, allow_pickle=False) as data:
            fingerprint = str(data["fingerprint"])
            if fingerprint != self.fingerprint:
                raise ValueError("it belongs to another build")
            if not np.array_equal(data["cells"], _cells(chunk)):
                raise ValueError(f"its cells {data['cells'].tolist()} are not chunk {chunk}")
            part = {name: data[name] for name in _ARRAYS}
            digest = str(data["digest"])
        for name, dtype in _ARRAYS.items():
            if part[name].shape != shape or part[name].dtype != dtype:
                raise ValueError(
                    f"{name} has shape {part[name].shape} and dtype {part[name].dtype}; "
                    f"expected {shape} and {dtype}"
                )
        if _digest(part) != digest:
            raise ValueError("its SHA-256 does not match its arrays")
        return part

    def save(self, chunk, part):
        """Write a finished chunk's arrays to its file, atomically.

        Parameters
        ----------
        chunk : atlas.chunks.Chunk
        part : dict
            The arrays of :func:`atlas.chunks.compute_chunk`.

        Returns
        -------
        pathlib.Path
            The file written.
        """
        part = {
            name: np.ascontiguousarray(part[name], dtype=dtype) for name, dtype in _ARRAYS.items()
        }
        contents = dict(
            part,
            fingerprint=np.array(self.fingerprint),
            cells=_cells(chunk),
            digest=np.array(_digest(part)),
        )
        path = self.chunk_path(chunk)
        # Uncompressed: zlib made a chunk of 24 n x 1,000 p 2.7 times smaller but took 20 times
        # as long (215 ms against 11 ms), and with many workers the client saves tens of
        # chunks a second; the directory is transient, the atlas file is compressed.
        _write_atomic(path, lambda fh: np.savez(fh, **contents))
        return path

    def _remove_leftovers(self):
        """Remove temporary files left by writers of this host that were killed."""
        for entry in self.directory.iterdir():
            if _is_leftover(entry.name) and not _writer_alive(entry.name):
                try:
                    entry.unlink()
                except FileNotFoundError:
                    pass

    def __repr__(self):
        return f"CheckpointStore({str(self.directory)!r}, {self.fingerprint[:19]}...)"


def _digest(part):
    """SHA-256 over the arrays of a chunk, in a fixed order."""
    digest = hashlib.sha256()
    for name in _ARRAYS:
        values = np.ascontiguousarray(part[name])
        digest.update(f"|{name}|{values.dtype.str}|{values.shape}|".encode())
        digest.update(values.tobytes())
    return "sha256:" + digest.hexdigest()


def _mismatch(directory, old, parts, n, p, chunks):
    """The message refusing a directory made for another build: what differs, both ways."""
    old_parts = old.get("parts", {})
    differ = []
    if old_parts.get("grid") != parts["grid"]:
        was = old.get("grid_summary", "another grid")
        differ.append(f"grid (directory: {was}; this build: {_grid_summary(n, p)})")
    if old_parts.get("methods") != parts["methods"]:
        was = ", ".join(old_parts.get("methods") or []) or "unknown"
        differ.append(f"methods (directory: {was}; this build: {', '.join(parts['methods'])})")
    # Another grid has another chunk plan too: the chunking is named only for the same grid.
    if old_parts.get("grid") == parts["grid"] and old_parts.get("chunking") != parts["chunking"]:
        was = old.get("chunks", "?")
        bounds = "; the same count, other bounds" if was == chunks else ""
        differ.append(
            f"chunking (directory: {was} chunks; this build: {chunks} chunks{bounds}; "
            "rerun with the same p_block and chunk_cost)"
        )
    if old_parts.get("schema") != parts["schema"]:
        differ.append(
            f"schema (directory: {old_parts.get('schema', 'unknown')}; "
            f"this build: {parts['schema']})"
        )
    if not differ:
        differ.append("fingerprint (the manifest was edited)")
    return (
        f"`checkpoint` directory {str(directory)!r} was made for another build; refusing to mix "
        f"results. Its {'; its '.join(differ)}. Use another directory, or remove this one."
    )
