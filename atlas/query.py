"""The Atlas object: answers from the cube, computed exactly where the cube has no cell."""

from atlas import cube


class Atlas:
    """An opened atlas: its Dataset and the questions asked of it.

    Parameters
    ----------
    dataset : xarray.Dataset
        An atlas Dataset (see :mod:`atlas.cube`).
    path : pathlib.Path, optional
        The file it came from.

    Attributes
    ----------
    dataset : xarray.Dataset
    path : pathlib.Path or None
    """

    def __init__(self, dataset, path=None):
        self.dataset = dataset
        self.path = path

    @property
    def methods(self):
        """The methods held in the atlas, as a tuple of str."""
        return tuple(str(m) for m in self.dataset["method"].values)

    def __repr__(self):
        ds = self.dataset
        where = f" from {str(self.path)!r}" if self.path is not None else ""
        return (
            f"<Atlas{where}: {ds.sizes['n']} n x {ds.sizes['p']} p x {ds.sizes['method']} methods>"
        )


def open_atlas(path=None, *, verify=False):
    """Open an atlas file, or the embedded default atlas.

    Parameters
    ----------
    path : str or os.PathLike, optional
        A file written by :func:`atlas.save_atlas`; None opens the default atlas shipped with
        the package.
    verify : bool, optional
        Recompute and compare the stored checksum (reads every value).

    Returns
    -------
    Atlas

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        If it is not a readable atlas of this schema version, or fails its checksum.
    """
    target = cube.default_path() if path is None else path
    return Atlas(cube.load_dataset(target, verify=verify), path=target)
