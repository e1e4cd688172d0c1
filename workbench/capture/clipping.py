"""Clipping judged on evidence: a recorder's range, not a flat top as such.

A channel driven past an oscilloscope's or a logger's range sits at its extreme
code while the signal would have gone on. A converter's winding voltage is flat
by nature (a square or a trapezoid), and a circuit simulator writes it without a
trace of noise. So a flat top at the extreme alone is no evidence. The evidence
is that the record carries noise everywhere else (a real recorder) while the
flat runs at the extreme are exactly constant (the noise, too, was cut off), and
that the signal is still moving towards the extreme when it stops there (its
slope is cut off).

This module sits at the bottom of the layers (numpy only); the noise level is
passed in.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["ClippingEvidence", "clipping_evidence"]

#: Runs at the extreme shorter than this are ignored (a sample or two at a peak).
MIN_RUN = 3
#: Share of the samples that must sit in such runs.
MIN_SHARE = 0.01
#: Samples before a run over which the approach to the extreme is measured.
APPROACH = 64
#: The approach must exceed this many standard deviations of its noise.
SLOPE_SIGMAS = 3.0


@dataclass(frozen=True)
class ClippingEvidence:
    """What a channel shows at its extremes.

    Attributes
    ----------
    clipped : bool
        True when the record shows a recorder's range: noise elsewhere, noise-free
        runs at the extreme, entered with the slope cut off.
    share : float
        Fraction of the samples in runs of at least ``MIN_RUN`` at the max or min [-].
    reason : str
        The evidence in words (why it is, or is not, taken as clipped).
    """

    clipped: bool
    share: float
    reason: str


def _runs_at(y: np.ndarray, level: float):
    at = np.concatenate(([0], (y == level).view(np.int8), [0]))
    edges = np.diff(at)
    starts = np.flatnonzero(edges == 1)
    ends = np.flatnonzero(edges == -1)
    keep = ends - starts >= MIN_RUN
    return starts[keep], ends[keep]


def clipping_evidence(y, *, noise: float) -> ClippingEvidence:
    """Decide whether a channel was clipped by its recorder's range.

    Parameters
    ----------
    y : array_like
        The channel as recorded [any unit].
    noise : float
        White-noise standard deviation of the channel [unit of y] (for example
        :func:`workbench.waveforms.estimate_noise`); 0 for a noise-free record.

    Returns
    -------
    ClippingEvidence

    Notes
    -----
    Clipped when all of: more than 1 % of the samples sit in runs of 3 or more
    at exactly the maximum or the minimum; the record has noise (``noise > 0``:
    a recorder's front end, while a simulator's ideal square has none); and the
    signal enters those runs still moving towards the extreme: over the w = 64
    samples before each run, the mean of the later half minus the mean of the
    earlier half (towards the extreme) exceeds, in the median over the runs,
    three standard deviations of that difference under noise alone,
    :math:`2\\sigma/\\sqrt{w}`. Common practice, no source.
    """
    y = np.asarray(y, dtype=float).ravel()
    hi, lo = float(y.max()), float(y.min())
    if hi == lo:
        return ClippingEvidence(False, 1.0, "the channel is constant")
    entries = []  # (index of the first flat sample, level, +1 for the top / -1 for the bottom)
    stuck = 0
    for level, sign in ((hi, 1.0), (lo, -1.0)):
        starts, ends = _runs_at(y, level)
        stuck += int(np.sum(ends - starts))
        entries.extend((int(s0), sign) for s0 in starts if s0 >= 4)
    share = stuck / y.size
    if share <= MIN_SHARE:
        return ClippingEvidence(False, share, "no flat runs at the extremes")
    if not noise > 0:
        return ClippingEvidence(False, share, "flat at the extremes but noise-free everywhere (an ideal waveform)")
    if not entries:
        return ClippingEvidence(False, share, "flat at the extremes from the start")
    # approach: mean of the later half of the window before each run minus the earlier half,
    # towards the extreme; noise on that difference is 2 sigma / sqrt(w)
    moves, limits = [], []
    for s0, sign in entries:
        w = min(APPROACH, s0) // 2 * 2
        if w < 4:
            continue
        seg = y[s0 - w:s0]
        moves.append(sign * (seg[w // 2:].mean() - seg[: w // 2].mean()))
        limits.append(SLOPE_SIGMAS * 2.0 * noise / np.sqrt(w))
    if not moves or float(np.median(np.asarray(moves) - np.asarray(limits))) <= 0:
        return ClippingEvidence(False, share, "the signal arrives at its extremes with no slope (a natural flat top)")
    return ClippingEvidence(
        True, share,
        f"{100 * share:.3g} % of the samples sit noise-free at the extremes, entered at full slope",
    )
