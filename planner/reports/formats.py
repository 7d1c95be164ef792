"""The number formatters every report uses: terminal, Markdown, HTML and plot titles alike.

One significant-digit count (:data:`DIGITS`), one interval form ``best [low, high]`` at
:data:`~planner.fits.CONFIDENCE` (stated once per document, :data:`INTERVAL_NOTE`), one percent
form, so a number reads the same wherever a person meets it. CSV files and JSON carry the raw
numbers instead (see :mod:`planner.reports.table` and :mod:`planner.reports.jsondoc`).

Values no float can show are never printed as ``inf``, ``nan``, ``-0`` or a zero interval
``0 [0, 0]``: infinity reads :data:`BEYOND`, nan reads '—', a rate below :data:`TINY` (an
underflow: the model's rates are never exactly zero) reads :data:`UNDERFLOW`; the renderers add
:func:`overflow_notes` under a table that shows either.

>>> num(0.000123456), num(None), num(float("inf")), num(-0.0), span(1.5, 1.25, 1.75)
('0.000123', '—', 'beyond any reachable', '0', '1.5 [1.25, 1.75]')
>>> span(0.0, 0.0, 0.0), rate(0.0), rate(1e-320, Interval(low=0.0, best=1e-320, high=2e-320)), rate(2e-3)
('0', '< 1e-300', '< 1e-300', '0.002')
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence

from planner.fits import CONFIDENCE, Interval

#: significant digits of every number shown to a person (the CSV files keep full precision)
DIGITS = 3
INTERVAL_NOTE = (f"Intervals read best [low, high] at {CONFIDENCE:.0%} confidence (likelihood ratio for "
                 "fitted rates and Lambda, bootstrap for answers derived from the model).")
#: the interval convention in a terminal table's title
CL = f"{CONFIDENCE:.0%} intervals"
#: the one-line caveat under every report table
CAVEAT = "Model-based projection from simulated circuits: check it against the device."
#: marks a value outside the sampled scale range
EXTRAPOLATED = "†"
EXTRAPOLATED_NOTE = f"{EXTRAPOLATED} extrapolated: outside the sampled scale range (the note says how far)."
#: marks a rate fitted from a task with no error seen
ZERO_ERRORS = "*"
#: said of a model figure printed without an interval (no bootstrap replicas were run)
POINT_VALUE = "best value of the model; no bootstrap interval"

#: printed for an infinite value (an overflow: e.g. a Lambda with a component perfect, a factor
#: or a distance no finite improvement reaches)
BEYOND = "beyond any reachable"
#: rates (logical error per cycle) below this are an underflow of the model's formula
TINY = 1e-300
UNDERFLOW = f"< {TINY:g}"
OVERFLOW_NOTES = {
    BEYOND: f"{BEYOND}: the model's value lies outside what a floating-point number holds (an "
            "overflow, or a rate too small to show), so no figure is printed; the other columns say "
            "what is reachable.",
    UNDERFLOW: f"{UNDERFLOW}: the model's logical error per cycle is below {TINY:g}, smaller than a "
               "floating-point number holds (an underflow, not zero).",
}
#: whole numbers below this are written in full ('2177', not '2.18e+03')
_FULL_BELOW = 1e6


def num(x: float | None, digits: int = DIGITS) -> str:
    """A number for people: ``digits`` significant digits, integers (and numbers of at least
    ``digits`` integer digits, below a million) in full; '—' for missing, nan or -infinity;
    :data:`BEYOND` for +infinity; never '-0'.

    >>> num(2.71828), num(2177.0), num(1234.56), num(35), num(1.5e-7), num(-0.0), num(3e7)
    ('2.72', '2177', '1235', '35', '1.5e-07', '0', '3e+07')
    """
    if x is None:
        return "—"
    if isinstance(x, int) and not isinstance(x, bool):
        return str(x)
    x = float(x)
    if math.isnan(x) or x == -math.inf:
        return "—"
    if math.isinf(x):
        return BEYOND
    if 10 ** max(digits, 1) <= abs(x) < _FULL_BELOW:
        text = f"{x:.0f}"
    else:
        text = f"{x + 0.0:.{max(digits, 1)}g}"  # + 0.0 turns -0.0 into 0.0
    return "0" if text in ("-0", "0") else text


def _degenerate(*cells: str) -> bool:
    """An interval whose ends and best say nothing more than the best alone (all '0', all
    missing, all overflowing or all underflowing)."""
    return len(set(cells)) == 1 and cells[0] in ("0", "—", BEYOND, UNDERFLOW)


def _cell(x: float | None, digits: int, is_rate: bool) -> str:
    """One number; ``is_rate``: values below :data:`TINY` (zero included) are an underflow."""
    if is_rate and x is not None and math.isfinite(float(x)) and 0 <= float(x) < TINY:
        return UNDERFLOW
    return num(x, digits)


def span(best: float | None, low: float | None, high: float | None, digits: int = DIGITS, *,
         is_rate: bool = False) -> str:
    """``best [low, high]``; only ``best`` when both ends are missing or the interval is
    degenerate (never '0 [0, 0]').

    >>> span(0.7224, 0.7151, 0.7283), span(2.0, None, None), span(float("inf"), 2.0, float("inf"))
    ('0.722 [0.715, 0.728]', '2', 'beyond any reachable [2, beyond any reachable]')
    """
    if low is None and high is None:
        return _cell(best, digits, is_rate)
    cells = tuple(_cell(x, digits, is_rate) for x in (best, low, high))
    return cells[0] if _degenerate(*cells) else f"{cells[0]} [{cells[1]}, {cells[2]}]"


def interval(iv: Interval | None, digits: int = DIGITS, *, scale: float = 1.0, is_rate: bool = False) -> str:
    """An interval (each end multiplied by ``scale``), '—' for None.

    >>> interval(Interval(low=0.557, best=0.593, high=0.631)), interval(None)
    ('0.593 [0.557, 0.631]', '—')
    """
    if iv is None:
        return "—"
    return span(iv.best * scale, iv.low * scale, iv.high * scale, digits, is_rate=is_rate)


def estimate(best: float | None, iv: Interval | None = None, digits: int = DIGITS, *, scale: float = 1.0,
             is_rate: bool = False) -> str:
    """``best [low, high]`` when there is an interval, else ``best`` alone; every number
    multiplied by ``scale``.

    >>> estimate(0.25, Interval(low=0.2, best=0.25, high=0.3), scale=100), estimate(0.25, None)
    ('25 [20, 30]', '0.25')
    """
    if iv is not None:
        return interval(iv, digits, scale=scale, is_rate=is_rate)
    return _cell(None if best is None else best * scale, digits, is_rate)


def rate(best: float | None, iv: Interval | None = None) -> str:
    """A logical error rate, ``best [low, high]``: values below :data:`TINY` (zero included) are
    an underflow and read :data:`UNDERFLOW`, never '0 [0, 0]'.

    >>> rate(3.49e-05, Interval(low=3.14e-05, best=3.49e-05, high=3.91e-05)), rate(0.0)
    ('3.49e-05 [3.14e-05, 3.91e-05]', '< 1e-300')
    """
    return estimate(best, iv, is_rate=True)


def percent(fraction: float | None, iv: Interval | None = None) -> str:
    """A fraction as a percentage with its interval (the unit, %, goes in the header).

    >>> percent(0.4287, Interval(low=0.4012, best=0.4287, high=0.4591)), percent(0.048)
    ('42.9 [40.1, 45.9]', '4.8')
    """
    return estimate(fraction, iv, scale=100)


def halvings(iv: Interval | None, factor: float) -> tuple[float, Interval | None]:
    """Halvings of error, log2(1/factor), and their interval from the factor's (the map is
    decreasing, so the factor's high end gives the low end). ``-0`` never appears.

    >>> h, iv = halvings(Interval(low=0.125, best=0.25, high=0.5), 0.25)
    >>> h, (iv.low, iv.best, iv.high)
    (2.0, (1.0, 2.0, 3.0))
    """
    h = lambda s: 0.0 + (-math.log2(s) if s > 0 else math.inf)  # noqa: E731
    return h(factor), (None if iv is None else Interval(low=h(iv.high), best=h(iv.best), high=h(iv.low)))


def scales_text(scales: dict[str, float]) -> str:
    """The scale factors of an operating point, briefly.

    >>> scales_text({"gate_1q": 0.5, "gate_2q": 0.5}), scales_text({"gate_2q": 0.4, "readout": 1.0})
    ('every component ×0.5', 'gate_2q ×0.4, others ×1')
    """
    values = set(scales.values())
    if len(values) == 1:
        return f"every component ×{num(values.pop())}"
    changed = [f"{c} ×{num(x)}" for c, x in scales.items() if x != 1.0]
    return ", ".join(changed) + (", others ×1" if len(changed) < len(scales) else "")


def overflow_notes(cells: Iterable[str | Sequence[object]]) -> list[str]:
    """The notes explaining :data:`BEYOND` / :data:`UNDERFLOW` for those that occur in ``cells``
    (strings, or rows of cells).

    >>> overflow_notes(["2.5", ("x", "< 1e-300")])[0].startswith("< 1e-300: ")
    True
    """
    flat = " ".join(c if isinstance(c, str) else " ".join(map(str, c)) for c in cells)
    return [note for marker, note in OVERFLOW_NOTES.items() if marker in flat]


def join_notes(*parts: str) -> str:
    """The non-empty parts, joined by '; '.

    >>> join_notes("a", "", "b")
    'a; b'
    """
    return "; ".join(p for p in parts if p)
