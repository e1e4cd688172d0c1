"""Splitting one period of flux into its major loop and minor loops.

The decomposition pairs flux reversals by rainflow counting (ASTM E1049-85, the
four-point form), which is the pairing the iGSE minor-loop procedure uses: a
minor loop is closed when the flux returns to the level it left. Each loop owns
two monotonic halves of the flux path; a half is the *first passage* of the flux
from the loop's start level to its end level, so the flux path of every segment
is owned by exactly one loop and nothing is counted twice.

References
----------
.. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate
   prediction of ferrite core loss with nonsinusoidal waveforms using only
   Steinmetz parameters", IEEE Workshop on Computers in Power Electronics
   (COMPEL), 2002, pp. 36-41, sec. IV (minor loops).
.. [2] ASTM E1049-85 (reapproved 2017), *Standard Practices for Cycle Counting in
   Fatigue Analysis*, sec. 5.4.4.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench.waveforms import FluxWaveform, reversal_indices

__all__ = ["LoopSet", "decompose_loops", "loop_path_integrals"]


@dataclass(frozen=True)
class LoopSet:
    """The loops of one period of flux, in the waveform rotated to start at its maximum.

    Attributes
    ----------
    flux_pp : ndarray
        Peak-to-peak flux of each loop [T]; entry 0 is the major loop.
    b_low, b_high : ndarray
        Lower and upper flux level of each loop [T].
    halves : ndarray of int, shape (n_loops, 2, 2)
        For each loop, the sample spans ``(first, last)`` of the rotated, closed
        sample array within which its two halves run.
    targets : ndarray, shape (n_loops, 2)
        The flux level at which each half ends [T] (it starts at ``path[first]``).
    start : int
        Index of the original sample at which the rotated array starts.
    threshold : float
        Smallest flux swing counted as a reversal [T].
    """

    flux_pp: np.ndarray
    b_low: np.ndarray
    b_high: np.ndarray
    halves: np.ndarray
    targets: np.ndarray
    start: int
    threshold: float

    @property
    def n_minor(self) -> int:
        return int(self.flux_pp.size - 1)


def _rainflow_pairs(levels: np.ndarray):
    """Four-point rainflow on a reversal sequence that starts and ends on its maximum.

    Returns a list of ``(b, c, d)`` index triples into ``levels``: the loop
    b -> c -> b, closed on the way from c to d; and the residue indices.
    """
    cycles = []
    stack: list[int] = []
    for j in range(levels.size):
        stack.append(j)
        while len(stack) >= 4:
            a, b, c, d = stack[-4:]
            x = abs(levels[c] - levels[b])
            if x <= abs(levels[b] - levels[a]) and x <= abs(levels[d] - levels[c]):
                cycles.append((b, c, d))
                del stack[-3:-1]
            else:
                break
    return cycles, stack


def decompose_loops(waveform: FluxWaveform, threshold: float | None = None) -> LoopSet:
    """Split a period of flux into its major loop and its minor loops.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux.
    threshold : float, optional
        Smallest flux swing that counts as a reversal [T]; default derived from
        the data (see :func:`workbench.waveforms.default_threshold`).

    Returns
    -------
    LoopSet
    """
    b = waveform.b
    n = b.size
    if threshold is None:
        from workbench.waveforms import default_threshold

        threshold = default_threshold(b)
    rev = reversal_indices(b, threshold=threshold)
    start = int(rev[0])
    pos = np.append((rev - start) % n, n)  # positions in the rotated, closed array
    rolled = np.roll(b, -start)
    levels = np.append(rolled[pos[:-1]], rolled[0])
    cycles, residue = _rainflow_pairs(levels)
    if len(residue) == 2 or levels.size < 3:
        # no reversal at all besides the maximum: a constant waveform
        empty = np.zeros(0)
        return LoopSet(
            empty, empty, empty, np.zeros((0, 2, 2), dtype=int), np.zeros((0, 2)), start, float(threshold)
        )
    if len(residue) != 3:  # pragma: no cover - guaranteed by starting on the maximum
        raise RuntimeError(f"rainflow residue of unexpected length {len(residue)}")
    i_max0, i_min, i_max1 = residue
    halves = [((pos[i_max0], pos[i_min]), (pos[i_min], pos[i_max1]))]
    targets = [(levels[i_min], levels[i_max1])]
    lo = [levels[i_min]]
    hi = [levels[i_max0]]
    for bb, cc, dd in cycles:
        halves.append(((pos[bb], pos[cc]), (pos[cc], pos[dd])))
        targets.append((levels[cc], levels[bb]))
        lo.append(min(levels[bb], levels[cc]))
        hi.append(max(levels[bb], levels[cc]))
    lo = np.asarray(lo)
    hi = np.asarray(hi)
    return LoopSet(
        hi - lo, lo, hi, np.asarray(halves, dtype=int), np.asarray(targets, dtype=float), start, float(threshold)
    )


def loop_path_integrals(waveform: FluxWaveform, loops: LoopSet, segment_weight: np.ndarray) -> np.ndarray:
    """Integral of ``segment_weight * |dB|`` over the flux path owned by each loop.

    Parameters
    ----------
    waveform : FluxWaveform
        The waveform the loops were found in.
    loops : LoopSet
        From :func:`decompose_loops`.
    segment_weight : ndarray
        One weight per segment of the *original* waveform (segment i runs from
        sample i to i+1, the last one wraps around), e.g. ``|dB/dt|**(alpha-1)``
        so that the result is the integral of ``|dB/dt|**alpha dt``.

    Returns
    -------
    ndarray
        One value per loop.

    Notes
    -----
    Within a half, a segment contributes only the part of its flux change that
    goes beyond the running extreme of that half (the first passage), clipped at
    the half's end level; sub-threshold wiggles inside a half therefore add
    nothing, and inner loops are counted by their own halves.
    """
    if loops.flux_pp.size == 0:
        return np.zeros(0)
    closed = np.append(np.roll(waveform.b, -loops.start), waveform.b[loops.start])
    weight = np.roll(np.asarray(segment_weight, dtype=float), -loops.start)
    out = np.zeros(loops.flux_pp.size)
    for j in range(loops.flux_pp.size):
        total = 0.0
        for (i0, i1), target in zip(loops.halves[j], loops.targets[j]):
            path = closed[i0 : i1 + 1]
            if path.size < 2:
                continue
            if target >= path[0]:
                extreme = np.maximum.accumulate(path)
                gain = np.minimum(path[1:], target) - extreme[:-1]
            else:
                extreme = np.minimum.accumulate(path)
                gain = extreme[:-1] - np.maximum(path[1:], target)
            np.clip(gain, 0.0, None, out=gain)
            total += float(np.dot(weight[i0:i1], gain))
        out[j] = total
    return out
