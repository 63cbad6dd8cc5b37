"""crystkin's figure style: colour-blind-safe colours, each paired with a marker and
a line style so that figures stay readable in grey-scale.

Colours from the palette of Okabe & Ito, "Color Universal Design" (2008).
"""

from __future__ import annotations

import itertools

COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000",
           "#F0E442")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")
LINESTYLES = ("-", "--", "-.", ":", (0, (5, 1)), (0, (3, 1, 1, 1)), (0, (1, 1)), "-")
BAND_ALPHA = 0.25

RC = {
    "figure.dpi": 100, "savefig.dpi": 100, "font.size": 9, "axes.titlesize": 9,
    "axes.labelsize": 9, "legend.fontsize": 8, "axes.grid": True, "grid.alpha": 0.3,
    "axes.spines.top": False, "axes.spines.right": False, "svg.hashsalt": "crystkin",
}


def cycle():
    """Endless (colour, marker, linestyle) triples."""
    return itertools.cycle(zip(COLOURS, MARKERS, LINESTYLES, strict=True))


def new_figure(width=6.0, height=4.0, ncols=1, nrows=1):
    """A matplotlib Figure (no pyplot state) with our style applied."""
    import matplotlib
    from matplotlib.figure import Figure

    with matplotlib.rc_context(RC):
        fig = Figure(figsize=(width, height), layout="constrained")
        axes = fig.subplots(nrows, ncols, squeeze=False)
    return fig, axes


def save(fig, path, *, fmt=None):
    """Save byte-stable (no software or date metadata)."""
    path = str(path)
    fmt = fmt or path.rsplit(".", 1)[-1]
    with open(path, "wb") as fh:
        fh.write(render(fig, fmt))
    return path


def render(fig, fmt: str = "png") -> bytes:
    """The figure as file bytes, byte-stable (no software or date metadata)."""
    import io

    import matplotlib

    meta = {"png": {"Software": None}, "svg": {"Date": None}, "pdf": {"CreationDate": None}}
    buf = io.BytesIO()
    with matplotlib.rc_context(RC):
        fig.savefig(buf, format=fmt, metadata=meta.get(fmt))
    return buf.getvalue()


def render_pickled(data: bytes, fmt: str = "png") -> bytes:
    """:func:`render` of a pickled figure (module level, for worker processes)."""
    import pickle

    return render(pickle.loads(data), fmt)
