"""Saving figures: the format from the file suffix, written atomically."""

from __future__ import annotations

from pathlib import Path

from ..io.atomic import atomic_write

__all__ = ["save_figure", "FORMATS"]

#: File suffixes a figure can be written as.
FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}


def save_figure(fig, path, *, dpi=150) -> Path:
    """Write ``fig`` to ``path`` (PNG, SVG or PDF, from the suffix) atomically.

    The picture goes to a temporary file in the same folder and is moved into place, so
    an interrupted run never leaves half a picture under the final name.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    path : str or Path
        Ends in ``.png``, ``.svg`` or ``.pdf``.
    dpi : int, default 150
        Resolution of PNG output.

    Returns
    -------
    Path

    Raises
    ------
    ValueError
        Unknown suffix.
    """
    path = Path(path)
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise ValueError(f"Unknown picture format {path.suffix!r}; use .png, .svg or .pdf")
    # metadata without a creation date keeps SVG/PDF output reproducible
    meta = {"png": {"Software": "congest"}, "svg": {"Date": None},
            "pdf": {"CreationDate": None}}[fmt]
    with atomic_write(path, "wb") as fh:
        fig.savefig(fh, format=fmt, dpi=dpi, metadata=meta)
    return path
