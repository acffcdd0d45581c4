"""Figures without pyplot: :class:`matplotlib.figure.Figure` objects, saved as inline PNG.

No backend is switched and no global plotting state is touched, so a notebook user's backend
stays as it was. Layouts are fixed by matplotlib's constrained layout, which is cheaper than
cropping to a tight bounding box when saving.
"""

from __future__ import annotations

import base64
import io

from matplotlib.figure import Figure

DPI = 110


def new_figure(width_in: float, height_in: float, rows: int = 1, cols: int = 1, **kwargs):
    """A figure of the given size [inches] and its axes (one, or an array for several)."""
    fig = Figure(figsize=(width_in, height_in), layout="constrained")
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
