"""Atomic file output: write to a temporary file beside the target, then rename.

A reader never sees a half-written file, and an error while writing leaves the old
file (or no file) in place. Use it for every output congest writes::

    from congest.io.atomic import atomic_write

    with atomic_write("results/links.csv") as fh:
        fh.write("link_id,volume\\n")
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

__all__ = ["atomic_write", "atomic_folder"]


@contextlib.contextmanager
def atomic_write(path, mode="w", *, encoding="utf-8", newline=None, make_parents=True):
    """Open a temporary file for writing; on success rename it over ``path``.

    Parameters
    ----------
    path : str or os.PathLike
        Final file name.
    mode : {"w", "wb"}, default "w"
        Text or binary.
    encoding : str, default "utf-8"
        Text mode only.
    newline : str, optional
        Passed to :func:`open` in text mode (use ``""`` for the csv module).
    make_parents : bool, default True
        Create missing parent folders.

    Yields
    ------
    file object
        Open for writing. If the block raises, the temporary file is removed and the
        target is left untouched.

    Notes
    -----
    The temporary file is created in the target's folder, so :func:`os.replace` is a
    rename on one file system and atomic on POSIX and Windows. The file is flushed and
    ``fsync``-ed before the rename. A new file gets the usual permissions (``0o666``
    minus the umask) rather than the private ``0o600`` of :mod:`tempfile`.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_write(folder / "a.txt") as fh:
    ...     _ = fh.write("done")
    >>> (folder / "a.txt").read_text()
    'done'
    """
    if mode not in ("w", "wb"):
        raise ValueError(f"Unknown mode {mode!r}; expected 'w' or 'wb'")
    target = Path(path)
    folder = target.parent
    if make_parents:
        folder.mkdir(parents=True, exist_ok=True)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    tmp = Path(tmp_name)
    try:
        if mode == "w":
            fh = os.fdopen(fd, "w", encoding=encoding, newline=newline)
        else:
            fh = os.fdopen(fd, "wb")
        with fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        _default_permissions(tmp, target)
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


def _default_permissions(tmp: Path, target: Path) -> None:
    try:
        if target.exists():
            os.chmod(tmp, target.stat().st_mode & 0o7777)
        else:
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(tmp, 0o666 & ~umask)
    except OSError:  # pragma: no cover - permissions are a nicety, not a requirement
        pass


@contextlib.contextmanager
def atomic_folder(files):
    """Write several files so that either all of them are replaced or none is.

    Parameters
    ----------
    files : iterable of path-like
        The final file names.

    Yields
    ------
    dict of Path to Path
        Final name -> temporary name to write to. After the block every temporary file is
        renamed over its final name; if the block raises, all temporaries are removed.

    Notes
    -----
    Each rename is atomic; the set of renames is not (a crash between two renames
    leaves some files new and some old), but an error raised while *writing* leaves every
    target untouched.
    """
    targets = [Path(f) for f in files]
    temps = {}
    try:
        for target in targets:
            target.parent.mkdir(parents=True, exist_ok=True)
            fd, name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp",
                                        dir=target.parent)
            os.close(fd)
            temps[target] = Path(name)
        yield dict(temps)
        for target, tmp in temps.items():
            _default_permissions(tmp, target)
            os.replace(tmp, target)
    except BaseException:
        for tmp in temps.values():
            with contextlib.suppress(FileNotFoundError):
                tmp.unlink()
        raise
