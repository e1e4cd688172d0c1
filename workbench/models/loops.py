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

from workbench.waveforms import FluxWaveform, _reversals

__all__ = ["LoopSet", "decompose_loops", "loop_abs_dbdt_integrals", "loop_path_integrals"]


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
        Smallest flux swing counted as a reversal [T]; 0 when the waveform rises
        and falls once per period and needed no threshold.
    monotone : bool
        True when the waveform rises once and falls once per period (one loop,
        both halves monotonic), so the first passage is the whole path.
    """

    flux_pp: np.ndarray
    b_low: np.ndarray
    b_high: np.ndarray
    halves: np.ndarray
    targets: np.ndarray
    start: int
    threshold: float
    monotone: bool = False

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


def _single_swing(waveform: FluxWaveform):
    """(index of the maximum, index of the minimum) when the flux rises once and falls once per
    period, flat stretches allowed; otherwise None."""
    d = waveform.segment_increments
    rising = d[d != 0] > 0
    # direction changes around the period (the wrap-around pair counted too), without np.roll's copy
    if rising.size < 2 or np.count_nonzero(rising[1:] != rising[:-1]) + int(rising[0] != rising[-1]) != 2:
        return None
    return int(np.argmax(waveform.b)), int(np.argmin(waveform.b))


def decompose_loops(waveform: FluxWaveform, threshold: float | None = None) -> LoopSet:
    """Split a period of flux into its major loop and its minor loops.

    Parameters
    ----------
    waveform : FluxWaveform
        One period of flux density B(t) [T].
    threshold : float, optional
        Smallest flux swing that counts as a reversal [T]; default derived from
        the data (see :func:`workbench.waveforms.default_threshold`).

    Returns
    -------
    LoopSet
        The major loop (entry 0) and the minor loops with their flux levels and
        the sample spans of their halves.

    Notes
    -----
    The reversal sequence, rotated to start and end on the global maximum, is
    counted with the four-point rainflow rule: for four consecutive reversals
    a, b, c, d, the pair (b, c) closes a loop of peak-to-peak flux
    ``|B_c - B_b|`` when ``|B_c - B_b| <= |B_b - B_a|`` and
    ``|B_c - B_b| <= |B_d - B_c|`` [2]_. What remains (maximum, minimum,
    maximum) is the major loop [1]_.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate
       prediction of ferrite core loss with nonsinusoidal waveforms using only
       Steinmetz parameters", IEEE COMPEL 2002, sec. IV.
    .. [2] ASTM E1049-85 (reapproved 2017), *Standard Practices for Cycle
       Counting in Fatigue Analysis*, sec. 5.4.4.
    """
    b = waveform.b
    n = b.size
    if threshold is not None and not (np.isfinite(threshold) and threshold >= 0):
        raise ValueError(f"threshold must be a finite non-negative number, got {threshold!r}")
    single = _single_swing(waveform)
    if single is not None:
        # one rise and one fall: no reversal to filter, the major loop is the whole path
        i_max, i_min = single
        lo, hi = float(b[i_min]), float(b[i_max])
        return LoopSet(
            np.array([hi - lo]), np.array([lo]), np.array([hi]),
            np.array([[[0, (i_min - i_max) % n], [(i_min - i_max) % n, n]]]), np.array([[lo, hi]]),
            i_max, 0.0 if threshold is None else float(threshold), monotone=True,
        )
    rev, threshold = _reversals(b, threshold)
    start = int(rev[0])
    pos = np.append((rev - start) % n, n)  # positions in the rotated, closed array
    levels = np.append(b[rev], b[start])
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


def _cyclic(x: np.ndarray, first: int, count: int) -> np.ndarray:
    """``count`` entries of the periodic array ``x`` from index ``first`` (a view unless it wraps)."""
    n = x.size
    first %= n
    if first + count <= n:
        return x[first : first + count]
    return np.concatenate((x[first:], x[: first + count - n]))


#: Samples per chunk in the loop integrals: the scratch stays in the CPU cache.
_CHUNK = 1 << 15


#: Row length of the blocked running extreme.
_RUN_BLOCK = 64


def _running_extreme(x: np.ndarray, carry: float, out: np.ndarray, rising: bool) -> None:
    """``out[i] = max(carry, x[0], ..., x[i])`` (min when not ``rising``), blocked.

    ``ufunc.accumulate`` is sequential and slow; on noisy flux most rows of
    ``_RUN_BLOCK`` samples hold no new extreme (their own extreme does not beat
    the running one before them), so those rows are filled with the running
    value and only the others are accumulated.
    """
    uf = np.maximum if rising else np.minimum
    m = x.size
    nb = m // _RUN_BLOCK
    if nb < 64:  # short: the plain accumulate costs less than the blocking
        uf.accumulate(x, out=out)
        uf(out, carry, out=out)
        return
    cut = nb * _RUN_BLOCK
    head = x[:cut].reshape(nb, _RUN_BLOCK)
    row_ext = head.max(axis=1) if rising else head.min(axis=1)
    before = np.empty(nb)
    before[0] = carry
    uf.accumulate(row_ext[:-1], out=before[1:])
    uf(before[1:], carry, out=before[1:])
    new = row_ext > before if rising else row_ext < before
    rows = np.flatnonzero(new)
    o = out[:cut].reshape(nb, _RUN_BLOCK)
    if 2 * rows.size > nb:
        uf.accumulate(head, axis=1, out=o)
        uf(o, before[:, None], out=o)
    else:
        o[...] = before[:, None]
        if rows.size:
            sub = uf.accumulate(head[rows], axis=1)
            uf(sub, before[rows, None], out=sub)
            o[rows] = sub
    if cut < m:
        uf.accumulate(x[cut:], out=out[cut:])
        uf(out[cut:], out[cut - 1], out=out[cut:])


def _half_integral(b: np.ndarray, first: int, count: int, target: float, weight_of, buf: np.ndarray) -> float:
    """Sum of ``weight * first-passage gain`` over the ``count`` segments of one half.

    The half starts at sample ``first`` (indices wrap around the period). For a
    rising half the gain of segment i is
    ``max(0, min(B[i+1], target) - max(B[first..i]))`` (mirrored when falling).
    The half is walked in cache-sized chunks carrying the running extreme.
    """
    n = b.size
    rising = target >= b[first % n]
    carry = -np.inf if rising else np.inf
    total = 0.0
    for c0 in range(0, count, _CHUNK):
        m = min(_CHUNK, count - c0)
        path = _cyclic(b, first + c0, m + 1)
        extreme = buf[:m]
        gain = buf[_CHUNK : _CHUNK + m]
        nxt = path[1:]
        _running_extreme(path[:-1], carry, extreme, rising)
        if rising:
            np.subtract(nxt, extreme, out=gain)
        else:
            np.subtract(extreme, nxt, out=gain)
        carry = float(extreme[-1])
        positive = gain > 0
        n_pos = int(np.count_nonzero(positive))
        if n_pos == 0:
            continue
        start = (first + c0) % n
        if 4 * n_pos > m:
            # dense (e.g. noise-free flux): clip in place, weights of the whole chunk
            if rising:
                np.minimum(nxt, target, out=gain)
                np.subtract(gain, extreme, out=gain)
            else:
                np.maximum(nxt, target, out=gain)
                np.subtract(extreme, gain, out=gain)
            np.maximum(gain, 0.0, out=gain)
            total += _weighted_sum(weight_of.dense(start, m), gain)
            continue
        where = np.flatnonzero(positive)
        # beyond the end level a new extreme is no longer part of this half
        if rising:
            g = np.minimum(nxt[where], target) - extreme[where]
        else:
            g = extreme[where] - np.maximum(nxt[where], target)
        keep = g > 0
        if not keep.all():
            g, where = g[keep], where[keep]
        seg = where + start
        if start + m > n:
            seg %= n
        total += _weighted_sum(weight_of.sparse(seg), g)
    return total


def _weighted_sum(weight: np.ndarray, gain: np.ndarray) -> float:
    """sum(weight * gain) without BLAS (np.dot on short vectors can stall on a busy machine)."""
    prod = np.multiply(weight, gain)
    return float(prod.sum())


class _ArrayWeight:
    """Per-segment weights given as an array (see :func:`loop_path_integrals`)."""

    def __init__(self, weight: np.ndarray):
        self.weight = weight

    def dense(self, start: int, m: int) -> np.ndarray:
        return _cyclic(self.weight, start, m)

    def sparse(self, seg: np.ndarray) -> np.ndarray:
        return self.weight[seg]


class _SlopeWeight:
    """``|dB/dt|**(exponent-1)`` of the segments, computed only where asked."""

    def __init__(self, waveform: FluxWaveform, exponent: float):
        self.b = waveform.b
        self.t = waveform.t
        self.period = waveform.period
        self.a1 = float(exponent) - 1.0

    def dense(self, start: int, m: int) -> np.ndarray:
        n = self.b.size
        slope = np.diff(_cyclic(self.b, start, m + 1))
        if start + m + 1 <= n:
            dt = np.diff(self.t[start : start + m + 1])
        else:  # the wrap-around segment lasts period - t[-1]
            t = self.t
            dt = np.concatenate((np.diff(t[start:]), [self.period - t[-1]], np.diff(t[: start + m + 1 - n])))
        np.abs(slope, out=slope)
        slope /= dt
        return slope**self.a1

    def sparse(self, seg: np.ndarray) -> np.ndarray:
        n = self.b.size
        nxt = seg + 1
        wrap = nxt == n
        nxt[wrap] = 0
        slope = np.abs(self.b[nxt] - self.b[seg])
        dt = self.t[nxt] - self.t[seg]
        dt[wrap] += self.period
        slope /= dt
        return slope**self.a1


def _loop_integrals(waveform: FluxWaveform, loops: LoopSet, weight_of):
    """Sum over each loop's first-passage path of ``weight_of(segments) * gain``."""
    out = np.zeros(loops.flux_pp.size)
    b = waveform.b
    buf = np.empty(2 * _CHUNK)
    halves = loops.halves.tolist()
    targets = loops.targets.tolist()
    for j in range(out.size):
        total = 0.0
        for (i0, i1), target in zip(halves[j], targets[j]):
            if i1 > i0:
                total += _half_integral(b, loops.start + i0, i1 - i0, target, weight_of, buf)
        out[j] = total
    return out


def loop_path_integrals(waveform: FluxWaveform, loops: LoopSet, segment_weight: np.ndarray) -> np.ndarray:
    r"""Integral of ``segment_weight * |dB|`` over the flux path owned by each loop.

    Parameters
    ----------
    waveform : FluxWaveform
        The waveform the loops were found in, B(t) [T].
    loops : LoopSet
        From :func:`decompose_loops` (flux levels [T]).
    segment_weight : ndarray
        One weight per segment of the *original* waveform (segment i runs from
        sample i to i+1, the last one wraps around), e.g. ``|dB/dt|**(alpha-1)``
        so that the result is the integral of ``|dB/dt|**alpha dt`` [any unit].

    Returns
    -------
    ndarray
        One value per loop [unit of the weight times T].

    Notes
    -----
    Within a half, a segment contributes only the part of its flux change that
    goes beyond the running extreme of that half (the first passage), clipped at
    the half's end level; sub-threshold wiggles inside a half therefore add
    nothing, and inner loops are counted by their own halves:

    .. math:: I_j = \sum_{h \in j} \sum_i w_i \max(0, \min(B_{i+1}, B_{end}) - \max_{k \le i} B_k)

    for a rising half (mirrored for a falling one).

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, IEEE COMPEL
       2002, sec. IV (each minor loop integrated with its own flux swing).
    """
    weight = np.asarray(segment_weight, dtype=float)
    if weight.shape != waveform.b.shape:
        raise ValueError(
            f"segment_weight must have one entry per segment ({waveform.b.size}), got shape {weight.shape}"
        )
    if loops.monotone:
        return np.array([float(np.sum(weight * np.abs(waveform.segment_increments)))])
    return _loop_integrals(waveform, loops, _ArrayWeight(weight))


def loop_abs_dbdt_integrals(waveform: FluxWaveform, loops: LoopSet, exponent: float) -> np.ndarray:
    r"""Integral of ``|dB/dt|**exponent dt`` over the flux path owned by each loop.

    Parameters
    ----------
    waveform : FluxWaveform
        The waveform the loops were found in, B(t) [T].
    loops : LoopSet
        From :func:`decompose_loops` (flux levels [T]).
    exponent : float
        Exponent of the slope, alpha of the iGSE [-].

    Returns
    -------
    ndarray
        One value per loop [(T/s)**exponent s].

    Notes
    -----
    The same first-passage path as :func:`loop_path_integrals` with the weight
    ``|dB/dt|**(exponent-1)`` of each segment; the slopes are computed only for
    the segments that carry flux gain, so no full-length slope array is built.

    .. math:: I_j = \sum_{h \in j} \sum_i |\Delta B_i/\Delta t_i|^{a-1} g_i

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, IEEE COMPEL
       2002, eq. (11) and sec. IV.
    """
    if loops.monotone:
        return np.array([waveform.mean_abs_dbdt_power(exponent) * waveform.period])
    return _loop_integrals(waveform, loops, _SlopeWeight(waveform, exponent))
