"""Writing files atomically, and checking before any work that they can be written.

- :func:`replacing`: a temporary name in the target's directory, renamed over the target when
  the block ends without an error; a failure at any point (an error, Ctrl-C) removes the
  temporary file and leaves the target as it was, so no reader ever meets a half-written file.
- :func:`replacing_directory`: the same for a directory of files (a wiki page): written into a
  temporary directory beside the target and renamed into place when complete.
- :func:`check_target` and :func:`check_directory_target`: the checks a command makes before it
  starts work: the target may be written (a probe file is created and removed in its
  directory), and an existing target is replaced only when asked to.

Errors name the path the caller gave, never a temporary name.
"""

import contextlib
import os
import shutil
from pathlib import Path

__all__ = [
    "check_directory_target",
    "check_target",
    "replacing",
    "replacing_directory",
    "save_text",
]


def _temporary(path, kind):
    """``.<name>.<pid>.<kind>`` beside ``path``."""
    return path.with_name(f".{path.name}.{os.getpid()}.{kind}")


def _named(error, path):
    """``error`` (an OSError about a temporary name) retold about the caller's ``path``."""
    if isinstance(error, OSError) and error.errno is not None:
        return type(error)(error.errno, f"{error.strerror}; cannot write", str(path))
    return error


def _probe(path, name):
    """Create and remove a probe file beside ``path``: the directory exists and is writable."""
    if path.parent != Path() and not path.parent.exists():
        raise FileNotFoundError(f"`{name}` is in a directory that does not exist: {str(path)!r}.")
    if not path.parent.is_dir():
        raise NotADirectoryError(
            f"`{name}` is in something that is not a directory: {str(path)!r}."
        )
    probe = _temporary(path, "probe")
    try:
        with open(probe, "xb"):
            pass
    except OSError as err:
        reason = err.strerror or type(err).__name__
        raise PermissionError(
            f"`{name}` cannot be written: {str(path)!r} ({reason} in its directory)."
        ) from None
    finally:
        with contextlib.suppress(OSError):
            probe.unlink()


def check_target(path, *, overwrite=False, name="path"):
    """Refuse, before any work, a file target that cannot or may not be written.

    Parameters
    ----------
    path : str or os.PathLike
        The file to be written.
    overwrite : bool, optional
        Replace an existing file (default: refuse it).
    name : str, optional
        How the caller calls the target in messages (``"-o"`` on the command line).

    Returns
    -------
    pathlib.Path

    Raises
    ------
    IsADirectoryError
        If ``path`` is a directory.
    FileExistsError
        If ``path`` exists and ``overwrite`` is False.
    FileNotFoundError, NotADirectoryError
        If the directory of ``path`` does not exist, or is not a directory.
    PermissionError
        If no file can be created in that directory.

    Examples
    --------
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     _ = (Path(folder) / "lot.txt").write_text("80 fasteners")
    ...     check_target(Path(folder) / "lot.txt", name="-o")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    FileExistsError: `-o` '.../lot.txt' exists; pass --force to replace it.
    """
    path = Path(path)
    if path.is_dir():
        raise IsADirectoryError(f"`{name}` must name a file; got a directory: {str(path)!r}.")
    if path.exists() and not overwrite:
        raise FileExistsError(f"`{name}` {str(path)!r} exists; pass --force to replace it.")
    _probe(path, name)
    return path


# The files a wiki directory holds: a directory holding anything else is never replaced.
_PAGE_SUFFIXES = (".html", ".md", ".svg", ".png", ".pdf", ".csv", ".json")


def check_directory_target(path, *, overwrite=False, name="directory"):
    """Refuse, before any work, a directory target that cannot or may not be written.

    An empty directory, or none, is fine. A non-empty one is replaced only with ``overwrite``,
    and only if it holds nothing but page files (``.html``, ``.md``, ``.svg``, ``.png``,
    ``.pdf``, ``.csv``, ``.json``) and no subdirectory: a directory of other files is never
    replaced.

    Parameters
    ----------
    path : str or os.PathLike
    overwrite : bool, optional
    name : str, optional
        How the caller calls the target in messages.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    NotADirectoryError
        If ``path`` is a file, or its parent is not a directory.
    FileExistsError
        If ``path`` is a non-empty directory and ``overwrite`` is False, or it holds other
        files than a page's.
    FileNotFoundError
        If the parent of ``path`` does not exist.
    PermissionError
        If nothing can be created in the parent of ``path``.
    """
    path = Path(path)
    if not path.name:  # "." or "..": the directory by its own name
        path = path.resolve()
    if path.exists() and not path.is_dir():
        raise NotADirectoryError(f"`{name}` must name a directory; got a file: {str(path)!r}.")
    # Replacing a directory renames it away: never the one a shell (or this process) stands in.
    here = Path.cwd().resolve()
    if path.is_dir() and (path.resolve() == here or path.resolve() in here.parents):
        raise IsADirectoryError(
            f"`{name}` {str(path)!r} is the current directory or holds it; it is never "
            "replaced: name a new or empty directory beside it."
        )
    if path.is_dir():
        entries = sorted(path.iterdir())
        foreign = [e.name for e in entries if e.is_dir() or e.suffix not in _PAGE_SUFFIXES]
        if foreign:
            raise FileExistsError(
                f"`{name}` {str(path)!r} holds files a page does not write (such as "
                f"{foreign[0]!r}); it is never replaced: name a new or empty directory."
            )
        if entries and not overwrite:
            raise FileExistsError(
                f"`{name}` {str(path)!r} is a directory that is not empty; pass --force to "
                "replace it."
            )
    _probe(path, name)
    return path


@contextlib.contextmanager
def replacing(path):
    """Yield a temporary path beside ``path``; when the block ends without an error, rename it
    over ``path``. The temporary file is removed in every case.

    Parameters
    ----------
    path : str or os.PathLike
        The target file.

    Yields
    ------
    pathlib.Path
        ``.<name>.<pid>.tmp`` in the target's directory, for the block to write.

    Raises
    ------
    FileNotFoundError
        If the target's directory does not exist (before the block runs).
    OSError
        If the temporary file cannot be written or renamed; the message names ``path``.

    Examples
    --------
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     with replacing(Path(folder) / "lot.txt") as tmp:
    ...         _ = tmp.write_text("80 fasteners")
    ...     sorted(p.name for p in Path(folder).iterdir())
    ['lot.txt']
    """
    path = Path(path)
    if not path.parent.is_dir():
        raise FileNotFoundError(f"`path` is in a directory that does not exist: {str(path)!r}.")
    tmp = _temporary(path, "tmp")
    try:
        try:
            yield tmp
            os.replace(tmp, path)
        except OSError as err:
            if err.filename in (str(tmp), tmp):
                raise _named(err, path) from None
            raise
    finally:
        if tmp.exists():
            tmp.unlink()


@contextlib.contextmanager
def replacing_directory(path, *, overwrite=True):
    """Yield a temporary directory beside ``path``; when the block ends without an error, put
    it in the place of ``path``. The temporary directory is removed in every case.

    Parameters
    ----------
    path : str or os.PathLike
        The target directory; its parent must exist.
    overwrite : bool, optional
        Replace an existing non-empty directory of page files (see
        :func:`check_directory_target`, which is applied first).

    Yields
    ------
    pathlib.Path
        ``.<name>.<pid>.tmp`` beside the target, created empty, for the block to fill.

    Raises
    ------
    As :func:`check_directory_target`.

    Notes
    -----
    An existing target is first renamed to ``.<name>.<pid>.old``, the new directory renamed
    into its place, and the old one then removed; if the second rename fails, the old directory
    is put back.
    """
    path = check_directory_target(path, overwrite=overwrite)
    tmp, old = _temporary(path, "tmp"), _temporary(path, "old")
    tmp.mkdir()
    try:
        try:
            yield tmp
        except OSError as err:  # about a file in the temporary directory: name the target's
            name = str(err.filename or "")
            if err.errno is not None and name.startswith(str(tmp)):
                inside = path / Path(name).relative_to(tmp)
                raise type(err)(err.errno, err.strerror, str(inside)) from None
            raise
        if path.exists():
            os.replace(path, old)
            try:
                os.replace(tmp, path)
            except OSError:
                os.replace(old, path)
                raise
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, path)
    finally:
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)


def save_text(path, data):
    """Write text (UTF-8) or bytes to ``path`` atomically (see :func:`replacing`).

    Returns
    -------
    pathlib.Path

    Raises
    ------
    FileNotFoundError
        If the target's directory does not exist.
    """
    path = Path(path)
    with replacing(path) as tmp:
        if isinstance(data, str):
            tmp.write_text(data, encoding="utf-8", newline="")
        else:
            tmp.write_bytes(data)
    return path
