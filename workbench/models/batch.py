"""iGSE with minor loops for many evenly sampled periods at once (one loss per row).

The batch kernel of the models (``workbench.analysis.batch_igse`` re-exports it).

:func:`igse_batch` gives, row by row, the same number as
:func:`workbench.models.igse` on a :class:`~workbench.waveforms.FluxWaveform`
built from that row, without a Python loop over rows or samples.

How it works
------------
For piecewise-linear flux every segment i contributes
``c_i * (Delta B_j)**(beta-alpha)`` where ``c_i = |dB_i|**alpha * dt**(1-alpha)``
times the share of the segment's flux change that its loop j owns (first
passage), and ``Delta B_j`` is that loop's peak-to-peak flux. The power
``|dB_i|**alpha`` is the expensive part and is computed once per sample; the
loop procedure only decides which weight each piece of flux path gets.

* One pass over every row, in cache-sized chunks, computes ``|dB|**alpha``
  (as ``exp(alpha log|dB|)`` where numpy has vector exp/log kernels), its row
  sum, the row's peak-to-peak flux and its number of sign changes. Rows that
  rise once and fall once per period (sine, triangle, trapezoid, ...) are done:
  their loss is ``flux_pp**(beta-alpha)`` times the sum.
* Rows with more sign changes are copied (increments and ``|dB|**alpha``) into
  a buffer and handled together, about a thousand rows at a time: turning
  points, threshold, rainflow pairing and ownership with work that grows with
  the number of *reversals*, not samples, plus one segmented sum
  (``np.add.reduceat``) over their samples.

Ownership by levels
-------------------
Between two consecutive reversals (a *leg*) the flux stays within the two
reversal levels. When the leg ends at reversal d, rainflow closes the loops
(b1, c1), (b2, c2), ... in turn; the leg's levels from its start to the level of
b1 belong to loop 1, from b1 to b2 to loop 2, and so on, and the remainder to
the half-loop that leaves the stack element below d. On a monotone leg the flux
reaches a level once, so each boundary level is one sample interval found by a
vectorised binary search over the leg, and the leg splits into index ranges
whose sums come from one ``reduceat``; the segment that crosses a boundary is
shared in proportion to its flux change. On a leg that still holds wiggles
below the reversal threshold, a sample owns only the levels beyond the leg's
running extreme (first passage), exactly as in
:func:`workbench.models.loop_path_integrals`; such legs get their per-sample
shares from a running maximum and are searched on it.

The reversal threshold only matters where a swing between turning points is
smaller than it. Before the median-based noise estimate is computed for a row,
a cheap count proves for most clean rows that the threshold lies below every
swing (at least half of the second differences are small enough, so their
median is); only the other rows pay for the median and for pruning.

References
----------
.. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate
   prediction of ferrite core loss with nonsinusoidal waveforms using only
   Steinmetz parameters", IEEE Workshop on Computers in Power Electronics
   (COMPEL), 2002, pp. 36-41.
.. [2] ASTM E1049-85 (reapproved 2017), *Standard Practices for Cycle Counting in
   Fatigue Analysis*, sec. 5.4.4 (rainflow counting).
"""
from __future__ import annotations

import numpy as np

from workbench.models.steinmetz import igse_coefficient
from workbench.waveforms import (
    _MAD2,
    _MAD3,
    _REDUCE_MIN_SAMPLES,
    _ROUNDING,
    NOISE_MIN_SAMPLES,
    NOISE_SAMPLE_SIZE,
    NOISE_THRESHOLD_SIGMAS,
    QUANTISATION_THRESHOLD_STEPS,
    _noise_stride,
)

__all__ = ["igse_batch", "batch_thresholds", "CHUNK_SAMPLES", "MINOR_SAMPLES"]

#: Samples processed per chunk of rows in the pass over every row: keeps temporaries in cache.
CHUNK_SAMPLES = 1 << 17

#: Samples of minor-loop rows buffered before they are handled together: large enough that
#: the per-reversal Python loop of the rainflow pairing is spread over many rows.
MINOR_SAMPLES = 1 << 20

#: Standard deviation of white noise per unit median absolute second difference.
_MAD_SCALE = _MAD2

_EPS = np.finfo(float).eps

_SIMD_EXP_LOG = None


def _simd_exp_log() -> bool:
    """True when numpy runs its float64 exp and log on a vector (non-baseline) CPU target.

    Decided once from numpy's own dispatch table (``numpy.lib.introspect``,
    numpy >= 2.1), never from timing; False when that is not available.
    """
    global _SIMD_EXP_LOG
    if _SIMD_EXP_LOG is None:
        try:
            from numpy.lib.introspect import opt_func_info

            ok = True
            for name in ("exp", "log"):
                info = opt_func_info(func_name=f"^{name}$", signature="float64").get(name, {})
                cur = [str(v.get("current", "")) for v in info.values()]
                ok &= bool(cur) and all(c and not c.startswith("baseline") for c in cur)
            _SIMD_EXP_LOG = bool(ok)
        except Exception:  # older numpy: plain power
            _SIMD_EXP_LOG = False
    return _SIMD_EXP_LOG


def _abs_power(a: np.ndarray, alpha: float, out: np.ndarray) -> np.ndarray:
    """``a**alpha`` for non-negative a, into ``out`` (which may be ``a`` itself).

    Where numpy has vectorised exp and log kernels, ``exp(alpha * log(a))`` is
    about 1.5x faster than ``np.power`` and agrees with it to a few 1e-15
    (relative error about ``|alpha log a| * eps``); ``log(0) = -inf`` gives 0.
    """
    if not _simd_exp_log():
        return np.power(a, alpha, out=out)
    with np.errstate(divide="ignore"):
        np.log(a, out=out)
    np.multiply(out, alpha, out=out)
    return np.exp(out, out=out)


def _check_batch(b, period, threshold):
    arr = np.ascontiguousarray(b, dtype=float)
    if arr.ndim != 2:
        raise ValueError(f"b must be a 2-D array (n_waveforms, n_samples), got shape {arr.shape}")
    if arr.shape[1] < 2:
        raise ValueError(f"b needs at least 2 samples per row, got shape {arr.shape}")
    n_rows = arr.shape[0]
    per = np.asarray(period, dtype=float)
    if per.ndim == 0:
        per = np.full(n_rows, float(per))
    elif per.shape != (n_rows,):
        raise ValueError(f"period must be a scalar or have one value per row ({n_rows}), got shape {per.shape}")
    badp = ~np.isfinite(per) | (per <= 0)
    if badp.any():
        i = int(np.argmax(badp))
        raise ValueError(f"period must be finite and positive [s]; row {i} has {per[i]!r}")
    thr = None
    if threshold is not None:
        thr = np.asarray(threshold, dtype=float)
        if thr.ndim == 0:
            thr = np.full(n_rows, float(thr))
        elif thr.shape != (n_rows,):
            raise ValueError(f"threshold must be a scalar or have one value per row ({n_rows}), got shape {thr.shape}")
        badt = ~np.isfinite(thr) | (thr < 0)
        if badt.any():
            i = int(np.argmax(badt))
            raise ValueError(f"threshold must be finite and non-negative [T]; row {i} has {thr[i]!r}")
    return arr, per, thr


# ---------------------------------------------------------------------------
# reversal thresholds
# ---------------------------------------------------------------------------
def _row_noise(b: np.ndarray, b_abs: np.ndarray) -> np.ndarray:
    """Robust noise standard deviation of each row, as :func:`workbench.waveforms.estimate_noise`
    (``b_abs``: the largest |b| of each row)."""
    n_rows, n = b.shape
    out = np.zeros(n_rows)
    if n < NOISE_MIN_SAMPLES:
        return out
    s = _noise_stride(n, 2)
    d2 = b[:, 2::s] - 2.0 * b[:, 1:-1:s] + b[:, :-2:s]
    sigma2 = np.median(np.abs(d2), axis=1) / _MAD2
    rows = np.flatnonzero(sigma2 > _ROUNDING * b_abs)
    if rows.size:
        out[rows] = sigma2[rows]
        if s == 1 and _noise_stride(n, 3) == 1:
            d3 = np.subtract(d2[rows, 1:], d2[rows, :-1])  # the same sums as the single-waveform code
        else:
            s = _noise_stride(n, 3)
            sub = b[rows]
            d3 = ((sub[:, 3::s] - 2.0 * sub[:, 2:-1:s] + sub[:, 1:-2:s])
                  - (sub[:, 2:-1:s] - 2.0 * sub[:, 1:-2:s] + sub[:, :-3:s]))
        a3 = np.abs(d3, out=d3)
        smooth = 2 * np.count_nonzero(a3 < (0.5 * sigma2[rows] * _MAD3)[:, None], axis=1) > a3.shape[1]
        if smooth.any():
            out[rows[smooth]] = np.median(a3[smooth], axis=1) / _MAD3
    return out


def _row_flicker(b: np.ndarray) -> np.ndarray:
    """Code flicker of each row (True where any), as :func:`workbench.waveforms.code_flicker`."""
    n_rows, n = b.shape
    if n < NOISE_MIN_SAMPLES:
        return np.zeros(n_rows, dtype=bool)
    s = _noise_stride(n, 4)
    l2, l1, c, r1, r2 = (b[:, k : n - 4 + k : s] for k in range(5))
    hit = (l1 == r1) & (c != l1) & ((l2 == l1) | (r2 == r1))
    return hit.any(axis=1)


def _row_quantisation(b: np.ndarray, span: np.ndarray) -> np.ndarray:
    """Quantisation step of each row, as :func:`workbench.waveforms.quantisation_step`."""
    n_rows, n = b.shape
    if n < 5:
        return np.zeros(n_rows)
    s = max(1, (n - 1) // NOISE_SAMPLE_SIZE)
    dq = np.abs(b[:, 1::s] - b[:, :-1:s])
    pos = dq > 0
    cnt = np.count_nonzero(pos, axis=1)
    qmin = np.where(pos, dq, np.inf).min(axis=1)
    ok = (cnt >= 10) & (span != 0) & (qmin >= 1e-9 * span)
    out = np.zeros(n_rows)
    if ok.any():
        ratio = dq[ok] / qmin[ok, None]
        whole = (np.abs(ratio - np.round(ratio)) <= 0.01) & pos[ok]
        frac = np.count_nonzero(whole, axis=1) / cnt[ok]
        out[ok] = np.where(frac >= 0.95, qmin[ok], 0.0)
    return out


def _reversal_thresholds(b: np.ndarray) -> np.ndarray:
    """The threshold :func:`workbench.models.igse` derives for each row [T]: the rule of
    :func:`workbench.waveforms.default_threshold`, row by row."""
    bmax = b.max(axis=1)
    bmin = b.min(axis=1)
    span = bmax - bmin
    sigma = _row_noise(b, np.maximum(bmax, -bmin))
    h = np.maximum(NOISE_THRESHOLD_SIGMAS * sigma, 1e-12 * span)
    q = _row_quantisation(b, span)
    quant = np.flatnonzero(q > 0)
    if quant.size:
        noisy = sigma[quant] > 0
        quiet = quant[~noisy]
        if quiet.size:
            noisy[~noisy] = _row_flicker(b[quiet])
        rows = quant[noisy]
        h[rows] = np.maximum(h[rows], QUANTISATION_THRESHOLD_STEPS * q[rows])
    return h


def batch_thresholds(b) -> np.ndarray:
    """Data-derived reversal threshold of each row [T].

    Parameters
    ----------
    b : array_like, shape (n_waveforms, n_samples)
        Periods of flux density [T].

    Returns
    -------
    ndarray
        Per row, the rule of :func:`workbench.waveforms.default_threshold`:
        ``max(12 * noise, 1e-12 * ptp)``, and at least 2.5 quantisation steps q
        where the samples sit on a grid and show noise (a noise estimate above 0
        or code flicker).

    Notes
    -----
    .. math:: s_2 = \\frac{\\mathrm{med}|\\Delta^2 b|}{0.6745\\sqrt 6}, \\quad
              s_3 = \\frac{\\mathrm{med}|\\Delta^3 b|}{0.6745\\sqrt{20}}, \\quad
              \\sigma = s_3 \\text{ if } s_3 < s_2/2 \\text{ else } s_2

    References
    ----------
    .. [1] F. R. Hampel, "The influence curve and its role in robust estimation",
       J. Am. Stat. Assoc. 69(346), 1974 (median absolute deviation).
    """
    b = np.asarray(b, dtype=float)
    if b.ndim != 2:
        raise ValueError(f"b must be a 2-D array, got shape {b.shape}")
    if b.shape[1] == 0:
        return np.zeros(b.shape[0])
    return _reversal_thresholds(b)


def _threshold_below_swings(d, rows, s_min, b_abs):
    """Rows whose 12-sigma noise term is proven not to exceed their smallest swing.

    At least ``m // 2 + 1`` of the ``m`` absolute second differences at or below
    ``t`` put their median at or below ``t``. The differences are taken here from
    the increments, ``(b2 - b1) - (b1 - b0)``, which differ from the noise
    estimate's ``b2 - 2 b1 + b0`` by less than ``8 eps max|b|``; the test uses
    twice that margin, and ``t`` a relative margin of 1e-9 against rounding.
    Usually the leading part of a row already holds enough small differences;
    the whole row is read only for the others.
    """
    n = d.shape[1]
    m = n - 2
    need = m // 2 + 1
    t = s_min * (_MAD_SCALE / NOISE_THRESHOLD_SIGMAS) * (1.0 - 1e-9) - 16.0 * _EPS * b_abs
    ok = np.zeros(rows.size, dtype=bool)
    todo = np.flatnonzero(t > 0)
    lead = min(m, -(-(need + max(8, m // 16)) // 8) * 8)  # whole 8-byte words for the popcount
    for w in (lead, m):
        if todo.size == 0:
            break
        src = d[:, : w + 1] if todo.size == d.shape[0] else d[rows[todo], : w + 1]
        dd = np.subtract(src[:, 1:], src[:, :-1])
        np.abs(dd, out=dd)
        hit = _row_counts(dd <= t[todo, None], w) >= need
        ok[todo[hit]] = True
        todo = todo[~hit]
        if w == m:
            break
    return ok


# ---------------------------------------------------------------------------
# turning points
# ---------------------------------------------------------------------------
def _compressed_turns(up_rows: np.ndarray, nz_rows: np.ndarray):
    """Turning points of rows with flat segments: sign changes of the non-zero increments.

    Returns the number of turning points per row and the flat (row * n + column)
    index of each, a turning point being the first sample of the first non-flat
    segment in the new direction (as :func:`workbench.waveforms.reversal_indices`).
    """
    n_rows, n = up_rows.shape
    cnt = np.count_nonzero(nz_rows, axis=1)
    where_nz = np.flatnonzero(nz_rows)
    sc = up_rows.reshape(-1)[where_nz]
    ends = np.cumsum(cnt)
    starts = ends - cnt
    change = np.empty(sc.size, dtype=bool)
    np.not_equal(sc[1:], sc[:-1], out=change[1:])
    has = cnt > 0
    change[starts[has]] = sc[starts[has]] != sc[ends[has] - 1]
    counts = np.zeros(n_rows, dtype=np.intp)
    cs = np.zeros(sc.size + 1, dtype=np.intp)
    np.cumsum(change, out=cs[1:])
    counts[has] = cs[ends[has]] - cs[starts[has]]
    return counts, where_nz[change]


_popcount = getattr(np, "bitwise_count", None)  # numpy >= 2.0


def _turning_counts(d: np.ndarray, up: np.ndarray, change: np.ndarray) -> np.ndarray:
    """Sign changes of the increments of every row, flat increments taken as falling.

    ``up`` and ``change`` are work arrays, shape (R, >= n) with zero padding
    beyond n; on return ``change[r, i]`` marks a sign change at sample i. The
    count is the number of turning points for rows without flat segments.
    Treating a flat as falling can only add turning points (a pause in a rise
    counts twice), never remove one, so a row with 2 such changes has exactly
    2 turning points; rows above 2 are sorted out later.
    """
    n = d.shape[1]
    np.greater(d, 0.0, out=up[:, :n])
    np.not_equal(up[:, 1:n], up[:, : n - 1], out=change[:, 1:n])
    np.not_equal(up[:, 0], up[:, n - 1], out=change[:, 0])
    return _row_counts(change, n)


def _row_counts(mask: np.ndarray, width: int) -> np.ndarray:
    """Number of True entries in each row of a bool array whose columns beyond ``width`` are False.

    With rows of whole 8-byte words the count is a popcount of the words.
    """
    if _popcount is not None and mask.shape[1] % 8 == 0 and mask.flags.c_contiguous:
        return _popcount(mask.view(np.uint64)).sum(axis=1, dtype=np.intp)
    return np.count_nonzero(mask[:, :width], axis=1)


def _minor_turns(d, up, change, flat, rows):
    """Sorted (row rank, column) of the turning points of the given rows."""
    n_rows, n = d.shape
    rank_of = np.full(n_rows, -1, dtype=np.intp)
    rank_of[rows] = np.arange(rows.size)
    plain = np.zeros(n_rows, dtype=bool)
    plain[rows] = ~flat[rows]
    keys = []
    if plain.any():
        # one scan of the whole (contiguous, zero-padded) change mask, then keep our rows
        width = change.shape[1]
        k = np.flatnonzero(change)
        r = k // width
        keep = plain[r]
        keys.append(rank_of[r[keep]] * n + (k[keep] - r[keep] * width))
    fr = rows[flat[rows]]
    if fr.size:
        k = _compressed_turns(up[fr, :n], d[fr] != 0)[1]
        keys.append(rank_of[fr[k // n]] * n + k % n)
    key = np.concatenate(keys) if len(keys) > 1 else keys[0]
    if len(keys) > 1:
        key.sort()
    return key // n, key % n


# ---------------------------------------------------------------------------
# reversal pruning and rainflow pairing on the reversal lists of many rows
# ---------------------------------------------------------------------------
def _prune(r_ids, idx, lev, h, n_rows):
    """Remove inner reversal pairs smaller than the row's threshold, all rows at once.

    The same passes as :func:`workbench.waveforms.reversal_indices`, each one
    vectorised over the concatenated reversal lists of all rows. ``idx`` is
    carried along (the entry's index before pruning).
    """
    inf = np.inf
    while lev.size > 3:
        counts = np.bincount(r_ids, minlength=n_rows)
        same = r_ids[1:] == r_ids[:-1]
        sw_row = r_ids[:-1]
        swing = np.abs(np.diff(lev))
        small = same & (counts[sw_row] > 3) & (swing < h[sw_row])
        if not small.any():
            break
        m = swing.size
        prev_ok = np.zeros(m, dtype=bool)
        prev_ok[1:] = same[:-1]
        next_ok = np.zeros(m, dtype=bool)
        next_ok[:-1] = same[1:]
        left = np.full(m, inf)
        left[1:] = swing[:-1]
        left[~prev_ok] = inf
        right = np.full(m, inf)
        right[:-1] = swing[1:]
        right[~next_ok] = inf
        inner = small & prev_ok & next_ok  # neither the first nor the last swing of its row
        strict = inner & (swing <= left) & (swing < right)
        has_strict = np.zeros(n_rows, dtype=bool)
        has_strict[sw_row[strict]] = True
        tie = inner & (swing <= left) & (swing <= right) & ~has_strict[sw_row]
        cand = np.flatnonzero(strict)
        if tie.any():
            tj = np.flatnonzero(tie)
            _, first = np.unique(sw_row[tj], return_index=True)
            cand = np.concatenate((cand, tj[first]))
        if cand.size == 0:
            break
        keep = np.ones(lev.size, dtype=bool)
        keep[cand] = False
        keep[cand + 1] = False
        r_ids, idx, lev = r_ids[keep], idx[keep], lev[keep]
    return r_ids, idx, lev


def _rainflow(levp, lengths, expo):
    """Rainflow pairing of all rows together; ownership of every leg's levels.

    Parameters
    ----------
    levp : ndarray, shape (R, Lmax)
        Reversal levels of each row, starting and ending on the global maximum [T].
    lengths : ndarray of int
        Number of valid entries per row.
    expo : float
        beta - alpha.

    Returns
    -------
    piece_row, piece_leg, piece_end, piece_w : ndarrays
        One entry per piece of a leg's level range, ordered by row, leg and
        level: the row, the leg index q (from reversal q to q+1), the level at
        which the piece ends [T] and the weight ``(Delta B)**(beta-alpha)`` of the
        loop that owns it.

    Notes
    -----
    The four-point rule of ASTM E1049-85 sec. 5.4.4 as a loop over reversal
    positions, vectorised across rows. Rows are sorted by length so that the
    rows still running form a leading slice; the top four stack entries of every
    row are kept in dense arrays (renamed, not copied, when an entry is pushed;
    rows that have finished never run again), the rest of each stack in one flat
    array.
    """
    n_rows, lmax = levp.shape
    key = (lmax - lengths).astype(np.int16 if lmax < (1 << 15) else np.intp)
    order = np.argsort(key, kind="stable")  # longest first (radix sort on int16)
    ln = lengths[order]
    lev_t = np.ascontiguousarray(levp[order].T)  # one contiguous row per position j
    n_act = np.searchsorted(-ln, -np.arange(lmax), side="left")  # rows with length > j
    width = lmax + 1
    base = np.arange(n_rows) * width
    all_rows = np.arange(n_rows)
    sv = np.zeros(n_rows * width)  # stacked levels
    si = np.zeros(n_rows * width, dtype=np.intp)  # stacked reversal positions j
    sp = np.zeros(n_rows, dtype=np.intp)
    t1, t2, t3, t4 = (np.zeros(n_rows) for _ in range(4))  # levels at sp-1 .. sp-4
    i1, i2, i3, i4 = (np.zeros(n_rows, dtype=np.intp) for _ in range(4))
    c_row, c_leg, c_it, c_end, c_x, c_b, c_c = [], [], [], [], [], [], []
    t_n, t_end, t_ref = [], [], []
    for j in range(lmax):
        na = int(n_act[j])
        if na == 0:
            break
        t1, t2, t3, t4 = t4, t1, t2, t3
        i1, i2, i3, i4 = i4, i1, i2, i3
        t1[:na] = lev_t[j, :na]
        i1[:na] = j
        f = base[:na] + sp[:na]
        sv[f] = t1[:na]
        si[f] = j
        sp[:na] += 1
        if j >= 3:
            x = np.abs(t2[:na] - t3[:na])
            ok = x <= np.abs(t3[:na] - t4[:na])
            ok &= x <= np.abs(t1[:na] - t2[:na])
            ok &= sp[:na] >= 4
            cand = np.flatnonzero(ok)
            x = x[cand]
            it = 0
            while cand.size:
                c_row.append(cand)
                c_leg.append(j - 1)
                c_it.append(it)
                c_end.append(t3[cand])
                c_x.append(x)
                c_b.append(i3[cand])
                c_c.append(i2[cand])
                spc = sp[cand] - 2
                sp[cand] = spc
                t2[cand] = t4[cand]
                i2[cand] = i4[cand]
                g = base[cand] + spc
                sv[g - 1] = t1[cand]
                si[g - 1] = j
                t3[cand] = sv[g - 3]
                i3[cand] = si[g - 3]
                t4[cand] = sv[g - 4]
                i4[cand] = si[g - 4]
                keep = spc >= 4
                cand, g = cand[keep], g[keep]
                if cand.size == 0:
                    break
                x = np.abs(t2[cand] - t3[cand])
                ok = (x <= np.abs(t3[cand] - t4[cand])) & (x <= np.abs(t1[cand] - t2[cand]))
                cand, x = cand[ok], x[ok]
                it += 1
        if j >= 1:
            t_n.append(na)
            t_end.append(t1[:na].copy())
            t_ref.append(i2[:na].copy())
    # residue: [max, min, max] on every row -> the major loop
    if np.any(sp != 3):  # pragma: no cover - guaranteed by starting on the global maximum
        raise RuntimeError("rainflow residue of unexpected length")
    n_cl = sum(c.size for c in c_row)
    row_lmax = all_rows * lmax
    own = np.full(n_rows * lmax, -1, dtype=np.intp)  # loop of each reversal's outgoing half
    loop_x = np.empty(n_cl + n_rows)
    if n_cl:
        cr = np.concatenate(c_row)
        sizes = [c.size for c in c_row]
        cl = np.repeat(np.array(c_leg, dtype=np.intp), sizes)
        ci = np.repeat(np.array(c_it, dtype=np.intp), sizes)
        ce = np.concatenate(c_end)
        loop_x[:n_cl] = np.concatenate(c_x)
        ids = np.arange(n_cl)
        own[row_lmax[cr] + np.concatenate(c_b)] = ids
        own[row_lmax[cr] + np.concatenate(c_c)] = ids
    else:
        cr = cl = ci = np.zeros(0, dtype=np.intp)
        ce = np.zeros(0)
    loop_x[n_cl:] = sv[base] - sv[base + 1]
    own[row_lmax + si[base]] = n_cl + all_rows
    own[row_lmax + si[base + 1]] = n_cl + all_rows
    tn = np.array(t_n, dtype=np.intp)
    tr = np.concatenate([all_rows[:k] for k in t_n])
    tl = np.repeat(np.arange(tn.size), tn)
    te = np.concatenate(t_end)
    tw = own[row_lmax[tr] + np.concatenate(t_ref)]
    if np.any(tw < 0):  # pragma: no cover - every stacked reversal gets an outgoing half
        raise RuntimeError("unowned flux levels in the loop decomposition")
    # pieces of leg (row, q): its closures in the order they happened, then its tail;
    # grouped by the caller's row order, so no sort is needed
    cr = order[cr]
    tr = order[tr]
    grp_c = cr * lmax + cl
    grp_t = tr * lmax + tl
    per_grp = np.bincount(grp_c, minlength=n_rows * lmax) + np.bincount(grp_t, minlength=n_rows * lmax)
    offs = np.zeros(n_rows * lmax, dtype=np.intp)
    np.cumsum(per_grp[:-1], out=offs[1:])
    n_p = n_cl + tr.size
    weights = loop_x ** expo
    p_row = np.empty(n_p, dtype=np.intp)
    p_leg = np.empty(n_p, dtype=np.intp)
    p_end = np.empty(n_p)
    p_w = np.empty(n_p)
    dc = offs[grp_c] + ci
    dt = offs[grp_t] + per_grp[grp_t] - 1
    p_row[dc], p_leg[dc], p_end[dc], p_w[dc] = cr, cl, ce, weights[:n_cl]
    p_row[dt], p_leg[dt], p_end[dt], p_w[dt] = tr, tl, te, weights[tw]
    return p_row, p_leg, p_end, p_w


# ---------------------------------------------------------------------------
# the minor-loop rows
# ---------------------------------------------------------------------------
def _first_reaching(value_at, lo, hi, v_before, v_hi, target):
    """Smallest j in [lo, hi] with ``value_at(k, j) >= target[k]``, for values nondecreasing in j.

    Vectorised over the queries k. ``v_before`` is the value at ``lo - 1`` (below
    the target) and ``v_hi`` the value at ``hi`` (at or above it). The first
    rounds guess by linear interpolation and probe the guess and the sample
    before it (flux between two reversals is often close to a straight line, so
    one round usually settles it); bisection finishes the rest.
    """
    lo = lo.copy()
    hi = hi.copy()
    vl = v_before.astype(float, copy=True)
    vh = v_hi.astype(float, copy=True)
    act = np.flatnonzero(lo < hi)
    rounds = 0
    while act.size:
        a_lo, a_hi, tg = lo[act], hi[act], target[act]
        if rounds < 2:
            frac = (tg - vl[act]) / (vh[act] - vl[act])
            g = a_lo - 1 + np.ceil(frac * (a_hi - a_lo + 1)).astype(np.intp)
            np.clip(g, a_lo, a_hi, out=g)
            v = value_at(act, g)
            vm = value_at(act, g - 1)
            reach = v >= tg
            reach_m = vm >= tg
            exact = reach & ~reach_m
            lo[act[exact]] = g[exact]
            hi[act[exact]] = g[exact]
            both = reach & reach_m
            hi[act[both]] = g[both] - 1
            vh[act[both]] = vm[both]
            none = ~reach
            lo[act[none]] = g[none] + 1
            vl[act[none]] = v[none]
        else:
            mid = (a_lo + a_hi) >> 1
            reach = value_at(act, mid) >= tg
            hi[act[reach]] = mid[reach]
            nr = ~reach
            lo[act[nr]] = mid[nr] + 1
        rounds += 1
        act = act[lo[act] < hi[act]]
    return lo


def _wiggly_legs(bflat, cflat, n, lrow_base, lbuf_base, p0, length, l0, dirs, rng):
    """First-passage shares of the segments of legs that hold sub-threshold wiggles.

    Writes ``c_i = (|dB_i|**alpha / |dB_i|) * gain_i`` into ``cflat`` for every
    segment of these legs, where the gain is the flux beyond the leg's running
    extreme (clipped at the leg's end level), and returns the running extreme of
    each leg (normalised level ``u`` from 0 at the leg start) as a list of
    blocks, with the block and row of each leg, for the boundary search.
    """
    classes = np.ceil(np.log2(length + 1)).astype(int)
    blocks = []
    where = np.empty((length.size, 2), dtype=np.intp)
    for ci, wc in enumerate(np.unique(classes)):
        sel = np.flatnonzero(classes == wc)
        width = 1 << int(wc)
        ln = length[sel]
        ar = np.arange(width)
        valid = ar[None, :] <= ln[:, None]
        off = np.where(valid, p0[sel, None] + ar[None, :], p0[sel, None])
        off %= n
        bv = bflat[lrow_base[sel, None] + off]
        u = (bv - l0[sel, None]) * dirs[sel, None]
        run = np.maximum.accumulate(u, axis=1)
        seg_ok = valid[:, 1:]
        gain = np.minimum(u[:, 1:], rng[sel, None]) - run[:, :-1]
        np.maximum(gain, 0.0, out=gain)
        step = np.abs(bv[:, 1:] - bv[:, :-1])
        ci_idx = lbuf_base[sel, None] + off[:, :-1]
        qv = cflat[ci_idx[seg_ok]]
        st = step[seg_ok]
        share = np.divide(qv * gain[seg_ok], st, out=np.zeros_like(qv), where=st > 0)
        cflat[ci_idx[seg_ok]] = share
        blocks.append(run)
        where[sel, 0] = ci
        where[sel, 1] = np.arange(sel.size)
    return blocks, where


def _minor_sums(bflat, cbuf, n, gid, t_row, t_pos, t_lev, h, expo):
    """Loop-weighted sum of c over the segments of each minor-loop row.

    Parameters
    ----------
    bflat : ndarray
        All samples of the batch, row-major, flat [T].
    cbuf : ndarray, shape (m, n)
        ``|dB_i|**alpha`` of each buffered row (overwritten on wiggly legs).
    n : int
        Samples per row.
    gid : ndarray of int, shape (m,)
        Row of the batch of each buffered row.
    t_row, t_pos, t_lev : ndarray
        Turning points: buffered row, column and level [T], sorted by row and column.
    h : ndarray, shape (m,)
        Reversal threshold per row [T] (0 where no swing can be below it).
    expo : float
        beta - alpha.
    """
    m = gid.size
    cflat = cbuf.reshape(-1)
    rbase = gid * n
    # rotate each row's turning points to start at its first maximum, and close on it
    cnt = np.bincount(t_row, minlength=m)
    first = np.zeros(m, dtype=np.intp)
    np.cumsum(cnt[:-1], out=first[1:])
    rowmax = np.maximum.reduceat(t_lev, first)
    local = np.arange(t_row.size) - first[t_row]
    k0 = np.minimum.reduceat(np.where(t_lev == rowmax[t_row], local, n), first)
    start = t_pos[first + k0]
    rot = local - k0[t_row]
    rot += np.where(rot < 0, cnt[t_row], 0)
    firstc = first + np.arange(m)
    total = t_row.size + m
    r_ids = np.empty(total, dtype=np.intp)
    pos_u = np.empty(total, dtype=np.intp)
    lev = np.empty(total)
    dest = firstc[t_row] + rot
    r_ids[dest] = t_row
    pos_u[dest] = t_pos + np.where(t_pos < start[t_row], n, 0)
    lev[dest] = t_lev
    close = firstc + cnt
    r_ids[close] = np.arange(m)
    pos_u[close] = start + n
    lev[close] = rowmax
    idx = np.arange(total)
    if np.any(h > 0):
        r_ids, idx, lev = _prune(r_ids, idx, lev, h, m)
        pos_u = pos_u[idx]
    # padded table of reversal levels per row, and the rainflow pieces of each leg
    lengths = np.bincount(r_ids, minlength=m)
    fe = np.zeros(m, dtype=np.intp)
    np.cumsum(lengths[:-1], out=fe[1:])
    j_in_row = np.arange(r_ids.size) - fe[r_ids]
    lmax = int(lengths.max())
    levp = np.zeros((m, lmax))
    levp[r_ids, j_in_row] = lev
    p_row, p_leg, p_end, p_w = _rainflow(levp, lengths, expo)

    # legs: entry e to e+1 of the same row is leg number e - row
    e = np.flatnonzero(r_ids[1:] == r_ids[:-1])
    leg_row = r_ids[e]
    leg_p0 = pos_u[e]
    leg_len = pos_u[e + 1] - leg_p0
    leg_l0 = lev[e]
    lev_end = lev[e + 1]
    leg_dir = np.sign(lev[e + 1] - leg_l0)
    leg_rng = np.abs(lev[e + 1] - leg_l0)
    wiggly = (idx[e + 1] - idx[e]) > 1
    n_legs = e.size

    p_g = fe[p_row] - p_row + p_leg
    n_pieces = np.bincount(p_g, minlength=n_legs)
    pf = np.zeros(n_legs, dtype=np.intp)
    np.cumsum(n_pieces[:-1], out=pf[1:])
    rank = np.arange(p_g.size) - pf[p_g]
    bnd = np.flatnonzero(rank > 0)  # piece p starts at the boundary between p-1 and p
    b_leg = p_g[bnd]
    b_lev = p_end[bnd - 1]
    b_row = leg_row[b_leg]
    istar = np.empty(bnd.size, dtype=np.intp)  # segment (unrolled) that crosses the boundary
    below = np.empty(bnd.size)  # its flux change up to the boundary, as a share of its c

    wl = np.flatnonzero(wiggly)
    if wl.size:
        blocks, where = _wiggly_legs(bflat, cflat, n, rbase[leg_row[wl]], leg_row[wl] * n,
                                     leg_p0[wl], leg_len[wl], leg_l0[wl], leg_dir[wl], leg_rng[wl])
        wrank = np.full(n_legs, -1, dtype=np.intp)
        wrank[wl] = np.arange(wl.size)
    bw = wiggly[b_leg]
    mono = np.flatnonzero(~bw)
    if mono.size:
        g = b_leg[mono]
        dq = leg_dir[g]
        base = rbase[leg_row[g]]
        tgt = dq * b_lev[mono]

        def value_at(k, j):
            jj = j % n
            return dq[k] * bflat[base[k] + jj]

        jfirst = _first_reaching(value_at, leg_p0[g] + 1, leg_p0[g] + leg_len[g],
                                 dq * leg_l0[g], dq * lev_end[g], tgt)
        i_s = jfirst - 1
        istar[mono] = i_s
        c0 = i_s % n
        c1 = (i_s + 1) % n
        b0 = bflat[base + c0]
        step = np.abs(bflat[base + c1] - b0)
        qv = cflat[leg_row[g] * n + c0]
        below[mono] = qv / step * (dq * (b_lev[mono] - b0))
    wig = np.flatnonzero(bw)
    if wig.size:
        g = b_leg[wig]
        wr = wrank[g]
        target = leg_dir[g] * (b_lev[wig] - leg_l0[g])
        for ci, run in enumerate(blocks):
            sel = np.flatnonzero(where[wr, 0] == ci)
            if sel.size == 0:
                continue
            rows = run[where[wr[sel], 1]]
            jfirst = np.count_nonzero(rows < target[sel, None], axis=1)
            i_s = leg_p0[g[sel]] + jfirst - 1
            ext = rows[np.arange(sel.size), jfirst - 1]
            k = wig[sel]
            istar[k] = i_s
            c0 = i_s % n
            base = rbase[leg_row[g[sel]]]
            step = np.abs(bflat[base + (i_s + 1) % n] - bflat[base + c0])
            # c of the crossing segment was replaced by its first-passage share: use |dB|**alpha again
            ext_gain = np.minimum(rows[np.arange(sel.size), jfirst], leg_rng[g[sel]]) - ext
            share = cflat[leg_row[g[sel]] * n + c0]
            with np.errstate(invalid="ignore", divide="ignore"):
                below[k] = np.where(ext_gain > 0, share * (target[sel] - ext) / ext_gain, 0.0)
    # index ranges: piece p runs from its start to the next piece's start (unrolled columns).
    # Within a row the starts rise from `start` to below start + n: in column order the
    # pieces starting at or beyond n come first, then the others; an extra range opens
    # each row at column 0 and belongs to the last piece starting at or before it.
    p_start = np.empty(p_g.size, dtype=np.intp)
    firsts = np.flatnonzero(rank == 0)
    p_start[firsts] = leg_p0[p_g[firsts]]
    p_start[bnd] = istar
    wrapped = p_start >= n
    per_row = np.bincount(p_row, minlength=m)
    prf = np.zeros(m, dtype=np.intp)
    np.cumsum(per_row[:-1], out=prf[1:])
    n_wrap = np.bincount(p_row, weights=wrapped, minlength=m).astype(np.intp)
    t = np.arange(p_g.size) - prf[p_row]
    unwrapped_n = per_row - n_wrap
    dest = prf[p_row] + p_row + 1 + np.where(wrapped, t - unwrapped_n[p_row], t + n_wrap[p_row])
    size = p_g.size + m
    keys = np.empty(size, dtype=np.intp)
    wts = np.empty(size)
    keys[dest] = p_row * n + p_start - np.where(wrapped, n, 0)
    wts[dest] = p_w
    head = prf + np.arange(m)
    keys[head] = np.arange(m) * n
    wts[head] = p_w[prf + unwrapped_n - 1]
    sums = np.add.reduceat(cflat, keys)
    sums[:-1][keys[1:] == keys[:-1]] = 0.0
    sums *= wts
    out = np.add.reduceat(sums, head)
    out += np.bincount(b_row, weights=(p_w[bnd - 1] - p_w[bnd]) * below, minlength=m)
    return out


# ---------------------------------------------------------------------------
# the pass over every row
# ---------------------------------------------------------------------------
class _MinorBuffer:
    """Minor-loop rows waiting to be handled together.

    Each chunk copies in the increments and ``|dB|**alpha`` of its minor-loop
    rows; everything else (turning points, thresholds, pairing, sums) runs once
    per group of about :data:`MINOR_SAMPLES` samples, so its fixed cost per
    numpy call is spread over many rows.
    """

    def __init__(self, bflat, n, capacity, expo, thr):
        self.bflat = bflat
        self.n = n
        self.expo = expo
        self.thr = thr
        self.c = np.empty((capacity, n))
        self.d = np.empty((capacity, n))
        self.clear()

    def clear(self):
        self.size = 0
        self.gid, self.pp, self.b_abs = [], [], []

    def add(self, gid, q, d, local, pp, b_abs):
        k = self.size
        np.take(q, local, axis=0, out=self.c[k : k + local.size])
        np.take(d, local, axis=0, out=self.d[k : k + local.size])
        self.gid.append(gid)
        self.pp.append(pp)
        self.b_abs.append(b_abs)
        self.size += local.size

    def flush(self):
        """Loss sums (before the per-row scale) of the buffered rows, and their batch rows."""
        m = self.size
        gid = np.concatenate(self.gid)
        pp = np.concatenate(self.pp)
        b_abs = np.concatenate(self.b_abs)
        d = self.d[:m]
        c = self.c[:m]
        sums = np.empty(m)
        # rows with flat segments: exact turning count from the non-zero increments
        flat = (d == 0).any(axis=1)
        if flat.any():
            fr = np.flatnonzero(flat)
            simple = fr[_compressed_turns(d[fr] > 0, d[fr] != 0)[0] == 2]
            if simple.size:  # one rise and one fall after all: the whole path is the major loop
                sums[simple] = pp[simple] ** self.expo * c[simple].sum(axis=1)
                keep = np.ones(m, dtype=bool)
                keep[simple] = False
                rest = np.flatnonzero(keep)
                if rest.size:
                    sums[rest] = self._loops(gid[rest], c[rest], d[rest], flat[rest], pp[rest], b_abs[rest])
                self.clear()
                return gid, sums
        sums[:] = self._loops(gid, c, d, flat, pp, b_abs)
        self.clear()
        return gid, sums

    def _loops(self, gid, c, d, flat, pp, b_abs):
        m, n = d.shape
        up = d > 0
        change = np.empty((m, n), dtype=bool)
        np.not_equal(up[:, 1:], up[:, :-1], out=change[:, 1:])
        np.not_equal(up[:, 0], up[:, -1], out=change[:, 0])
        t_row, t_pos = _minor_turns(d, up, change, flat, np.arange(m))
        t_lev = self.bflat[gid[t_row] * n + t_pos]
        if self.thr is not None:
            h = self.thr[gid]
        else:
            h = _minor_thresholds(self.bflat, d, gid, t_row, t_pos, t_lev, pp, b_abs)
        return _minor_sums(self.bflat, c, n, gid, t_row, t_pos, t_lev, h, self.expo)


def _minor_thresholds(bflat, d, gid, t_row, t_pos, t_lev, pp, b_abs):
    """Reversal threshold of each buffered row [T], or 0 where it is proven below every swing.

    A threshold at or below the smallest swing between turning points prunes
    nothing, so 0 gives the same reversals. The bound uses the quantisation
    step (0 or the smallest non-zero increment, so at most the increment
    leaving a turning point), the span term, and the count test of
    :func:`_threshold_below_swings` for the noise term; rows that fail get the
    full rule.
    """
    m, n = d.shape
    if n < 5 or n >= _REDUCE_MIN_SAMPLES:
        # long rows: the noise estimate reads a stride, which the count test below does not
        return _reversal_thresholds(bflat.reshape(-1, n)[gid])
    h = np.zeros(m)
    cnt = np.bincount(t_row, minlength=m)
    first = np.zeros(m, dtype=np.intp)
    np.cumsum(cnt[:-1], out=first[1:])
    last = first + cnt - 1
    sw = np.empty(t_lev.size)
    np.subtract(t_lev[1:], t_lev[:-1], out=sw[:-1])
    sw[last] = t_lev[first] - t_lev[last]
    np.abs(sw, out=sw)
    s_min = np.minimum.reduceat(sw, first)
    # the quantisation step is 0 or the smallest non-zero increment (of the non-periodic ones)
    a_turn = np.abs(d.reshape(-1)[t_row * n + np.minimum(t_pos, n - 2)])
    a_turn[t_pos > n - 2] = np.inf
    q_bound = np.minimum.reduceat(a_turn, first)
    easy = (2.5 * q_bound <= s_min) & (1e-12 * pp <= s_min)
    ez = np.flatnonzero(easy)
    proven = np.zeros(m, dtype=bool)
    if ez.size:
        proven[ez] = _threshold_below_swings(d, ez, s_min[ez], b_abs[ez])
    hard = np.flatnonzero(~proven)
    if hard.size:
        h[hard] = _reversal_thresholds(bflat.reshape(-1, n)[gid[hard]])
    return h


class _Work:
    """Work arrays for the chunks of one call, allocated once."""

    def __init__(self, rows: int, n: int):
        self.d = np.empty((rows, n))
        self.q = np.empty((rows, n))
        width = -(-n // 8) * 8  # whole 8-byte words per row for the popcount
        self.up = np.zeros((rows, width), dtype=bool)
        self.change = np.zeros((rows, width), dtype=bool)


def _first_bad(b, row0):
    r, c = np.argwhere(~np.isfinite(b))[0]
    return ValueError(f"b has a non-finite value at row {row0 + r}, column {c}: {float(b[r, c])!r}")


def _chunk(b, scale, alpha, expo, minor_loops, row0, buf, work):
    """Losses of the rows of one chunk; minor-loop rows go to ``buf`` (their entry is left NaN)."""
    n_rows, n = b.shape
    bmax = b.max(axis=1)
    bmin = b.min(axis=1)
    if not (np.isfinite(bmax).all() and np.isfinite(bmin).all()):  # NaN propagates through max
        raise _first_bad(b, row0)
    d = work.d[:n_rows]
    np.subtract(b[:, 1:], b[:, :-1], out=d[:, :-1])
    np.subtract(b[:, 0], b[:, -1], out=d[:, -1])
    q = np.abs(d, out=work.q[:n_rows])
    _abs_power(q, alpha, q)
    total = q.sum(axis=1)
    pp = bmax - bmin
    flat_row = pp == 0
    with np.errstate(divide="ignore"):
        w_major = np.where(flat_row, 0.0, pp) ** expo
    w_major[flat_row] = 0.0
    if not minor_loops:
        return scale * w_major * total
    counts = _turning_counts(d, work.up[:n_rows], work.change[:n_rows])
    out = np.where(counts == 2, scale * w_major * total, 0.0)
    rows = np.flatnonzero(counts > 2)
    if rows.size:
        out[rows] = np.nan
        b_abs = np.maximum(np.abs(bmax[rows]), np.abs(bmin[rows]))
        buf.add(row0 + rows, q, d, rows, pp[rows], b_abs)
    return out


def igse_batch(b, period, k, alpha, beta, minor_loops: bool = True, *, threshold=None) -> np.ndarray:
    """iGSE loss of many evenly sampled periods of flux, one loss per row.

    Parameters
    ----------
    b : array_like, shape (n_waveforms, n_samples)
        Each row is one period of flux density, evenly sampled at
        ``t = i * period / n_samples`` and periodic (the last sample is followed by
        the first one a period later) [T].
    period : float or array_like, shape (n_waveforms,)
        Period of every row, or of each row [s].
    k, alpha, beta : float
        Steinmetz parameters [W/m^3 with f in Hz and B in T].
    minor_loops : bool, optional
        Apply the minor-loop procedure (default True); if False, each period is
        one loop of its peak-to-peak flux.
    threshold : float or array_like, optional
        Smallest reversal counted as a loop [T], for all rows or per row; by
        default derived from each row's own noise and quantisation, as
        :func:`workbench.models.igse` does.

    Returns
    -------
    ndarray, shape (n_waveforms,)
        Loss per unit volume of each row [W/m^3].

    Notes
    -----
    .. math:: P_v = \\frac{1}{T}\\sum_j \\int_{T_j} k_i \\left|\\frac{dB}{dt}\\right|^{\\alpha}
              (\\Delta B_j)^{\\beta-\\alpha} dt

    evaluated exactly for flux that is linear between samples, as
    :func:`workbench.models.igse` does for one waveform. Rows are read in chunks
    of about :data:`CHUNK_SAMPLES` samples; rows with minor loops are gathered
    into groups of about :data:`MINOR_SAMPLES` samples, so memory stays bounded.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate
       prediction of ferrite core loss with nonsinusoidal waveforms using only
       Steinmetz parameters", IEEE COMPEL 2002, pp. 36-41.
    """
    arr, per, thr = _check_batch(b, period, threshold)
    k_i = igse_coefficient(k, alpha, beta)
    alpha = float(alpha)
    beta = float(beta)
    n_rows, n = arr.shape
    scale = k_i * (per / n) ** (1.0 - alpha) / per
    out = np.empty(n_rows)
    step = max(1, CHUNK_SAMPLES // n)
    cap = max(1, MINOR_SAMPLES // n)
    buf = _MinorBuffer(arr.reshape(-1), n, cap + step, beta - alpha, thr) if minor_loops else None
    work = _Work(min(step, n_rows), n)
    for i in range(0, n_rows, step):
        sl = slice(i, min(i + step, n_rows))
        out[sl] = _chunk(arr[sl], scale[sl], alpha, beta - alpha, bool(minor_loops), i, buf, work)
        if buf is not None and (buf.size >= cap or sl.stop == n_rows) and buf.size:
            gid, sums = buf.flush()
            out[gid] = scale[gid] * sums
    return out
