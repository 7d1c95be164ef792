"""Matplotlib helpers of the report plots: figures, wrapped titles, log ticks, error bars, shades.

matplotlib is imported inside the functions (it is slow to import and only reports need it);
figures use the object API with the Agg renderer (no display, no pyplot state).
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from planner.fits import Interval

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.axis import Axis
    from matplotlib.figure import Figure

DPI = 110


def figure(width: float, height: float, *, ncols: int = 1, nrows: int = 1, **kw: Any) -> tuple[Figure, Any]:
    """A constrained-layout figure and its axes as a 2-D array."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=DPI, layout="constrained")
    axes = fig.subplots(nrows=nrows, ncols=ncols, squeeze=False, **kw)
    return fig, axes


def wrap(text: str, *, width_in: float, fontsize: float = 12.0) -> str:
    """``text`` broken into lines that fit ``width_in`` inches at ``fontsize`` points (a
    conservative 0.62 em per character), so no title is cut at the figure's edge.

    >>> t = wrap("Error budget: Lambda today 2.111 [2.081, 2.15] (error bars: 95% bootstrap)", width_in=4.0, fontsize=10)
    >>> print(t)
    Error budget: Lambda today
    2.111 [2.081, 2.15] (error bars: 95%
    bootstrap)
    """
    # a value and its interval "best [low, high]" are never split over two lines
    return wrap_chars(text, max(int(0.92 * width_in * 72 / (0.62 * fontsize)), 20))


def title(ax: Axes, text: str, *, fontsize: float = 12.0) -> None:
    """A title wrapped to its column's share of the figure (:func:`fit_titles` makes sure)."""
    fig = ax.get_figure()
    ncols = ax.get_subplotspec().get_gridspec().ncols if ax.get_subplotspec() is not None else 1
    ax.set_title(wrap(text, width_in=fig.get_figwidth() / ncols, fontsize=fontsize), fontsize=fontsize)


def fit_titles(fig: Figure, *, tries: int = 4) -> Figure:
    """Wrap the titles (and the figure's suptitle) until each lies inside the figure once laid
    out: a title is centred over its axes, which long tick labels push aside, so only the drawn
    extent tells whether it is cut at the edge."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    titles = [ax.title for ax in fig.axes] + ([fig._suptitle] if getattr(fig, "_suptitle", None) else [])
    for _ in range(tries):
        canvas.draw()
        renderer = canvas.get_renderer()
        width = fig.bbox.width
        changed = False
        for t in titles:
            text = t.get_text()
            if not text:
                continue
            bb = t.get_window_extent(renderer)
            if bb.x0 >= 0 and bb.x1 <= width:
                continue
            # room on the narrower side of the title's centre, doubled
            room = 2 * min((bb.x0 + bb.x1) / 2, width - (bb.x0 + bb.x1) / 2)
            chars = max(int(max(map(len, text.split("\n"))) * 0.95 * room / bb.width), 12)
            new = wrap_chars(text, chars)
            if new != text:
                t.set_text(new)
                changed = True
        if not changed:
            break
    return fig


def wrap_chars(text: str, chars: int) -> str:
    """``text`` (already wrapped or not) re-wrapped to at most ``chars`` characters a line."""
    import re
    import textwrap

    flat = " ".join(text.split())
    glued = re.sub(r"\S+ \[[^\]]*\]", lambda m: m.group().replace(" ", "\x00"), flat)
    lines = textwrap.wrap(glued, chars, break_long_words=False, break_on_hyphens=False)
    return "\n".join(lines).replace("\x00", " ") or text


def png_bytes(fig: Figure) -> bytes:
    """The figure as PNG bytes, its titles first fitted inside it."""
    fit_titles(fig)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI)
    return buf.getvalue()


def nice_log_ticks(low: float, high: float) -> list[float]:
    """Tick values for a log axis from ``low`` to ``high`` (both > 0) spanning less than two
    decades, where matplotlib would label only the powers of ten: the finest of the
    1..9, 1-1.5-2-3-4-5-7, 1-2-3-5 and 1-2-5 ladders that gives 2 to 8 ticks.

    >>> nice_log_ticks(0.95, 4.5)
    [1.0, 2.0, 3.0, 4.0]
    >>> nice_log_ticks(0.25, 1.3)
    [0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0]
    """
    ladders = ((1, 2, 3, 4, 5, 6, 7, 8, 9), (1, 1.5, 2, 3, 4, 5, 7), (1, 2, 3, 5), (1, 2, 5), (1,))
    for subs in ladders:
        ticks = [round(m * 10.0 ** k, 12) for k in range(math.floor(math.log10(low)) - 1,
                                                           math.ceil(math.log10(high)) + 1)
                 for m in subs if low <= m * 10.0 ** k <= high]
        if 2 <= len(ticks) <= 8:
            return ticks
    return []


def plain_log(ax: Axes, *, x: bool = True, y: bool = True) -> None:
    """Log axes with plain tick labels (0.5, 2, 3) where the range spans less than two decades."""
    from matplotlib.ticker import FixedLocator, FormatStrFormatter, NullFormatter, NullLocator

    for on, axis, lim in ((x, ax.xaxis, ax.get_xlim()), (y, ax.yaxis, ax.get_ylim())):
        lo, hi = sorted(lim)
        if not on or lo <= 0 or hi / lo >= 100:
            continue
        ticks = nice_log_ticks(lo, hi)
        if ticks:
            axis.set_major_locator(FixedLocator(ticks))
            axis.set_major_formatter(FormatStrFormatter("%g"))
            axis.set_minor_locator(NullLocator())
            axis.set_minor_formatter(NullFormatter())


def fixed_ticks(axis: Axis, values: list[float]) -> None:
    """Labelled ticks exactly at ``values`` (e.g. the sampled factors), no minor labels."""
    from matplotlib.ticker import FixedLocator, FormatStrFormatter, NullFormatter, NullLocator

    axis.set_major_locator(FixedLocator(sorted(set(values))))
    axis.set_major_formatter(FormatStrFormatter("%g"))
    axis.set_minor_locator(NullLocator())
    axis.set_minor_formatter(NullFormatter())


def errbar(ax: Axes, x: Sequence[float], iv: Sequence[Interval], **kw: Any) -> None:
    """Points at the intervals' best values with error bars to their ends."""
    best = np.array([i.best for i in iv])
    lo = np.clip(best - np.array([i.low for i in iv]), 0, None)
    hi = np.clip(np.array([i.high for i in iv]) - best, 0, None)
    ax.errorbar(x, best, yerr=[lo, hi], fmt="o", capsize=3, markersize=4, **kw)


def shade(base: str, k: int, n: int) -> str:
    """``base`` colour lightened for the k-th of n factors (darkest = smallest factor)."""
    from matplotlib.colors import to_rgb

    r, g, b = to_rgb(base)
    t = 0.0 if n <= 1 else 0.6 * k / (n - 1)
    return "#%02x%02x%02x" % tuple(round(255 * (c + (1 - c) * t)) for c in (r, g, b))


