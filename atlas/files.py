"""Writing files atomically: to a temporary name in the target's directory, renamed when complete.

A failure at any point (an error, Ctrl-C) removes the temporary file and leaves the target as it
was, so no reader ever meets a half-written file.
"""

import contextlib
import os
from pathlib import Path

__all__ = ["replacing", "save_text"]


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
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        yield tmp
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


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
