"""The drawing surface of every figure: a matplotlib ``Figure`` made without pyplot, its style, its bytes.

Figures are made with :class:`matplotlib.figure.Figure` and an Agg canvas,
never through pyplot: no global state, no window, no backend to choose, so
they can be made in threads, in tests and on machines without a display.  In
a notebook the returned ``Figure`` displays as usual.  :func:`render` turns
one into PNG, SVG or PDF bytes, deterministically (no dates, a fixed hash
salt for the SVG ids), so that the same input gives the same file.

matplotlib is imported here, and only when a figure is asked for: the
package's commands start without it.
"""

from __future__ import annotations

import contextlib
import io
from collections.abc import Iterator
from typing import Any, cast

from termination.defaults import FIGURE_DPI
from termination.errors import TerminationError
from termination.figures.palette import SLATE

__all__ = ["FORMATS", "STYLE", "check_format", "new_figure", "render", "style"]

#: Output formats of the figures; the first is the default of ``--plot-format``.
FORMATS: tuple[str, ...] = ("png", "svg", "pdf")

#: matplotlib settings of every figure: small type for print, no top/right spines, vector text in SVG.
STYLE: dict[str, Any] = {
    "font.size": 8.0,
    "axes.titlesize": 8.5,
    "axes.labelsize": 8.0,
    "legend.fontsize": 7.0,
    "xtick.labelsize": 7.0,
    "ytick.labelsize": 7.0,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.edgecolor": SLATE,
    "axes.linewidth": 0.7,
    "xtick.color": SLATE,
    "ytick.color": SLATE,
    "legend.frameon": False,
    "svg.fonttype": "path",  # text as outlines: the page needs no font
    "svg.hashsalt": "termination",  # stable ids: the same figure gives the same SVG
    "image.interpolation": "nearest",
}


@contextlib.contextmanager
def style() -> Iterator[None]:
    """The package's matplotlib settings, for the duration of a ``with`` block (the global ones are untouched)."""
    import matplotlib

    with matplotlib.rc_context(cast(Any, STYLE)):
        yield


def new_figure(width_in: float, height_in: float) -> Any:
    """An empty ``Figure`` of ``width_in`` x ``height_in`` inches with an Agg canvas and constrained layout."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(float(width_in), float(height_in)), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def check_format(fmt: str, error: type[TerminationError] = TerminationError) -> str:
    """``fmt`` lower-cased if it is one of :data:`FORMATS`, else ``error`` naming it."""
    f = str(fmt).lower().lstrip(".")
    if f not in FORMATS:
        raise error(f"figure format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    return f


def render(fig: Any, fmt: str = "png", dpi: float = FIGURE_DPI) -> bytes:
    """The bytes of ``fig`` as PNG, SVG or PDF (``dpi`` sets the PNG's resolution).

    The files carry no creation date, so rendering the same figure twice
    gives the same bytes.
    """
    f = check_format(fmt)
    metadata: dict[str, Any] = {"png": {"Software": None}, "svg": {"Date": None}, "pdf": {"CreationDate": None}}[f]
    buffer = io.BytesIO()
    with style():
        if fig.get_layout_engine() is not None and not getattr(fig, "_termination_laid_out", False):
            # Constrained layout moves the axes a little on every draw; lay out once and keep it,
            # so that every rendering of a figure (PNG, then SVG for a report) has the same geometry.
            fig.draw_without_rendering()
            fig.set_layout_engine("none")
            fig._termination_laid_out = True
        fig.savefig(buffer, format=f, dpi=dpi, metadata=metadata)
    return buffer.getvalue()
