"""Figures without pyplot: :class:`matplotlib.figure.Figure` objects, saved as inline PNG.

No backend is switched and no global plotting state is touched, so a notebook user's backend
stays as it was. Layouts are fixed margins given with the figure: no layout engine and no
cropping to a tight bounding box, which would draw each figure twice.
"""

from __future__ import annotations

import base64
import io

from matplotlib.figure import Figure

DPI = 110


MARGINS_IN = {"left": 0.85, "right": 0.75, "bottom": 0.5, "top": 0.35}
"""Room for tick labels, axis labels and titles [inches]; the right side leaves room for a
second axis."""


def new_figure(width_in: float, height_in: float, rows: int = 1, cols: int = 1,
               hspace: float = 0.55, wspace: float = 0.35, **kwargs):
    """A figure of the given size [inches] and its axes (one, or an array for several), with
    fixed margins (:data:`MARGINS_IN`)."""
    fig = Figure(figsize=(width_in, height_in))
    m = MARGINS_IN
    fig.subplots_adjust(left=m["left"] / width_in, right=1 - m["right"] / width_in,
                        bottom=m["bottom"] / height_in, top=1 - m["top"] / height_in,
                        hspace=hspace, wspace=wspace)
    axes = fig.subplots(rows, cols, **kwargs)
    return fig, axes


def png_bytes(fig: Figure) -> bytes:
    """The figure as PNG bytes."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI)
    return buf.getvalue()


def data_uri(fig: Figure) -> str:
    """The figure as a ``data:image/png;base64`` URI for a self-contained page."""
    return "data:image/png;base64," + base64.b64encode(png_bytes(fig)).decode("ascii")
