"""One plain look for every figure: Okabe–Ito colours, print-size text.

The look is applied around each drawing function (:func:`styled`) and each save
(:func:`save`) with ``matplotlib.rc_context``, never by changing the caller's
``matplotlib.rcParams``: a figure looks the same whatever was drawn before it in
the process, and a notebook user's own plots keep their settings.
"""

from __future__ import annotations

import functools

from matplotlib.figure import Figure

# Okabe & Ito colour-blind-safe palette.
PALETTE = ["#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000"]
GREY = "#7f7f7f"
RC = {"font.size": 9, "axes.titlesize": 10, "axes.labelsize": 9, "legend.fontsize": 8,
      "xtick.labelsize": 8, "ytick.labelsize": 8, "svg.hashsalt": "splitter", "svg.fonttype": "none"}


def colour(i: int) -> str:
    return PALETTE[i % len(PALETTE)]


def styled(draw):
    """Run a figure-drawing function inside the house style (text sizes are fixed when the
    artists are made)."""

    @functools.wraps(draw)
    def in_style(*args, **kwargs):
        import matplotlib

        with matplotlib.rc_context(RC):
            return draw(*args, **kwargs)

    return in_style


def new_figure(width=5.0, height=3.6) -> Figure:
    return Figure(figsize=(width, height), dpi=150, layout="constrained")


def save(fig: Figure, path_stem, formats=("png", "svg")) -> list:
    """Save a figure atomically in each format; PNG/SVG metadata fixed for reproducibility."""
    from pathlib import Path

    import matplotlib

    from splitter.io.atomic import atomic_path
    from splitter.io.journal import make_folder

    out = []
    for fmt in formats:
        path = Path(f"{path_stem}.{fmt}")
        make_folder(path.parent)
        meta = {"Software": None} if fmt == "png" else {"Date": None, "Creator": None}
        # In the house style again: tick labels are made while drawing, and SVG text and
        # element ids follow the settings at save time (a fixed hash salt makes every
        # figure byte-identical run to run, however it was built).
        with atomic_path(path) as tmp, matplotlib.rc_context(RC):
            fig.savefig(tmp, format=fmt, metadata=meta)
        out.append(path)
        # The layout is worked out by the first save; the other formats reuse it rather than
        # solving it again (half of a figure's cost), so every format shows the same layout.
        # No engine at all (not matplotlib's placeholder, which still costs a layout draw
        # per save): the axes keep the positions the first save gave them.
        fig.set_layout_engine(None)
    return out
