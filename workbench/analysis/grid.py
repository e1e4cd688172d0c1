"""Loss parts over a grid of frequency x peak flux x duty x lamination thickness.

Design studies sweep large grids (10^8 points is ordinary: 1000 frequencies x 100
flux levels x 10 duties x 100 thicknesses). :func:`grid_sweep` computes the grid
in chunks of at most ``chunk_points`` points, so memory stays bounded, and either
returns the whole labelled array (:class:`GridResult`) or reduces each chunk as it
is made: the minimum or maximum over some dimensions (with the coordinates where
it is reached), or a callback that sees every chunk.

Each part follows the loss engine's laws of the shape (:func:`workbench.engine.loss_laws`,
computed once per shape and duty, then scaled in frequency, flux and thickness), so a
grid point equals the engine's loss and the sweep value at the same settings.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from workbench.engine import Conditions, loss_laws, resolve_material
from workbench.shapes import SHAPES, ShapeSpec

__all__ = ["GRID_PARTS", "GridResult", "grid_sweep", "DEFAULT_CHUNK_POINTS", "MAX_MATERIALISED_POINTS"]

#: Loss parts a grid can hold, all loss densities [W/m^3].
GRID_PARTS = ("total", "hysteresis", "classical", "excess", "separation_total")
#: Grid points computed at once (per part).
DEFAULT_CHUNK_POINTS = 1 << 18
#: Largest grid returned whole (values of all parts together); beyond it use ``reduce``.
MAX_MATERIALISED_POINTS = 50_000_000


@dataclass(frozen=True)
class GridResult:
    """A labelled array: values over named dimensions with their coordinates.

    Attributes
    ----------
    dims : tuple of str
        Dimension names, in the order of ``values``' axes (``"part"`` first).
    coords : dict
        Coordinate values of each dimension (``part`` holds part names; ``freq`` [Hz],
        ``b_peak`` [T], ``duty`` [-], ``thickness`` [m], ``shape`` names).
    values : ndarray
        Loss densities [W/m^3]; NaN where a part does not exist for the material
        (hysteresis and excess without a separation set).
    reduced : dict
        For a reduced grid: the operation (``"min"`` or ``"max"``), the reduced
        dimensions, and for each of them ``"at_<dim>"``: the coordinate at which the
        extreme is reached, an array shaped like ``values``. Empty otherwise.
    """

    dims: tuple
    coords: dict
    values: np.ndarray
    reduced: dict = field(default_factory=dict)

    @property
    def shape(self) -> tuple:
        return self.values.shape

    def part(self, name: str) -> np.ndarray:
        """Values of one loss part [W/m^3], without the ``part`` axis."""
        names = list(self.coords["part"])
        if name not in names:
            raise ValueError(f"part must be one of {', '.join(names)}; got {name!r}")
        return self.values[names.index(name)]

    def sel(self, **where) -> np.ndarray | float:
        """Values at exact coordinate values, e.g. ``sel(part="total", freq=50.0)``."""
        index = []
        for dim in self.dims:
            if dim not in where:
                index.append(slice(None))
                continue
            coord = np.asarray(self.coords[dim])
            value = where.pop(dim)
            hits = np.flatnonzero(coord == value)
            if hits.size == 0:
                raise ValueError(f"{dim}={value!r} is not a coordinate of this grid")
            index.append(int(hits[0]))
        if where:
            raise ValueError(f"unknown dimension(s) {', '.join(where)}; dims are {', '.join(self.dims)}")
        out = self.values[tuple(index)]
        return float(out) if np.ndim(out) == 0 else out

    def to_dict(self) -> dict:
        """Plain lists, ready for JSON (NaN left as is)."""
        return {
            "dims": list(self.dims),
            "coords": {k: [x if isinstance(x, str) else float(x) for x in v] for k, v in self.coords.items()},
            "values": self.values.tolist(),
            "reduced": {k: (v.tolist() if isinstance(v, np.ndarray) else v) for k, v in self.reduced.items()},
        }


def _axis(value, name, *, positive=True, upper=None):
    arr = np.atleast_1d(np.asarray(value, dtype=float))
    if arr.ndim != 1 or arr.size == 0:
        raise ValueError(f"{name} must be a number or a 1-D sequence of numbers, got {value!r}")
    bad = ~np.isfinite(arr) | ((arr <= 0) if positive else np.zeros(arr.shape, bool))
    if upper is not None:
        bad |= arr > upper
    if bad.any():
        i = int(np.argmax(bad))
        raise ValueError(f"{name}[{i}] = {arr[i]!r} is not valid (finite, positive{', at most ' + str(upper) if upper else ''})")
    return arr


def _block_parts(laws, f, b, parts, rho, d):
    """All requested parts on one block: f (nf,), the flux values b (nb,), thicknesses d (nd,)."""
    nf, nb, nd = f.size, b.size, d.size
    p = laws.parts(f[:, None, None], (b / laws.b_peak)[None, :, None], thickness=d[None, None, :], resistivity=rho)
    nan = np.full((nf, nb, nd), np.nan)
    out = []
    for name in parts:
        v = p[name]
        out.append(nan if v is None else np.broadcast_to(v, (nf, nb, nd)))
    return np.stack(out)


def grid_sweep(material, *, freq, b_peak, duty=0.5, thickness=None, shape="sine", parts=GRID_PARTS,
               resistivity=None, skin_effect: bool = True, temperature=None,
               reduce: str | Callable | None = None, over=None,
               chunk_points: int = DEFAULT_CHUNK_POINTS) -> GridResult | None:
    """Loss parts of one material over frequency x peak flux x duty x thickness (x shape).

    Parameters
    ----------
    material : workbench.materials.Material
        Material data.
    freq : float or array_like
        Frequencies [Hz].
    b_peak : float or array_like
        Peak flux densities [T].
    duty : float or array_like, optional
        Duty cycles [-] (meaning as in :func:`workbench.analysis.make_shape`; ignored
        by the sine, which then has one duty coordinate of no effect).
    thickness : float or array_like, optional
        Lamination thicknesses [m]; default the material's.
    shape : str or sequence of str, optional
        Waveform shape(s): "sine", "triangle", "trapezoid". A sequence adds a
        ``shape`` dimension in front.
    parts : sequence of str, optional
        Which of :data:`GRID_PARTS` to compute (default all).
    resistivity : float, optional
        Resistivity [ohm m]; default the material's.
    skin_effect : bool, optional
        Include the skin effect in the classical part (default True).
    temperature : float, optional
        Core temperature [degC] for the Steinmetz coefficient.
    reduce : {"min", "max"} or callable, optional
        None (default) returns the whole grid (refused above
        :data:`MAX_MATERIALISED_POINTS` values). "min"/"max" returns the extreme over
        the dimensions in ``over`` and where it is reached. A callable is called with
        each chunk as a :class:`GridResult` and ``grid_sweep`` returns None.
    over : sequence of str, optional
        Dimensions reduced by "min"/"max" (default all but ``part``).
    chunk_points : int, optional
        Grid points per chunk (default :data:`DEFAULT_CHUNK_POINTS`).

    Returns
    -------
    GridResult or None
        Dims ``("part", ["shape",] "freq", "b_peak", "duty", "thickness")``.

    Notes
    -----
    For each (shape, duty) the engine's laws are computed once and scaled in f and
    flux (iGSE total as f**alpha B**beta plus relaxation, hysteresis as f, excess as
    (f B)**1.5, classical harmonic by harmonic with the skin effect and as B**2); a
    thickness other than the material's replaces the classical part of the headline
    total as in :func:`workbench.engine.core_loss`:

    .. math:: P_{cl}(f, \\hat B, d) = \\hat B^2 \\sum_n \\frac{\\pi^2 d^2 (n f)^2 b_n^2}{6\\rho}
              F\\!\\left(\\frac{d}{\\delta(n f)}\\right)

    with b_n the harmonic amplitudes of the shape at 1 T peak.

    References
    ----------
    .. [1] G. Bertotti, "General properties of power losses in soft ferromagnetic
       materials", IEEE Trans. Magn. 24(1), 1988, pp. 621-630.
    .. [2] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, IEEE COMPEL 2002.
    """
    f_ax = _axis(freq, "freq")
    b_ax = _axis(b_peak, "b_peak")
    duty_ax = _axis(duty, "duty", upper=1.0)
    material = resolve_material(material)
    d_ax = _axis(material.thickness if thickness is None else thickness, "thickness")
    rho = float(_axis(material.resistivity if resistivity is None else resistivity, "resistivity")[0])
    shapes = [shape] if isinstance(shape, str) else list(shape)
    for s in shapes:
        if s not in SHAPES:
            raise ValueError(f"shape must be one of {', '.join(SHAPES)}; got {s!r}")
    parts = (parts,) if isinstance(parts, str) else tuple(parts)
    for p in parts:
        if p not in GRID_PARTS:
            raise ValueError(f"parts must be among {', '.join(GRID_PARTS)}; got {p!r}")
    if not parts:
        raise ValueError("parts must name at least one loss part")
    chunk_points = int(chunk_points)
    if chunk_points < 1:
        raise ValueError(f"chunk_points must be a positive integer, got {chunk_points!r}")

    multi_shape = not isinstance(shape, str)
    dims = (("shape",) if multi_shape else ()) + ("freq", "b_peak", "duty", "thickness")
    coords = {"part": parts}
    if multi_shape:
        coords["shape"] = tuple(shapes)
    coords.update(freq=f_ax, b_peak=b_ax, duty=duty_ax, thickness=d_ax)
    grid_shape = (len(parts),) + ((len(shapes),) if multi_shape else ()) + (f_ax.size, b_ax.size, duty_ax.size, d_ax.size)
    full_dims = ("part",) + dims

    mode = None
    if reduce is None:
        total = int(np.prod(grid_shape, dtype=np.int64))
        if total > MAX_MATERIALISED_POINTS:
            raise ValueError(
                f"the grid holds {total} values, more than {MAX_MATERIALISED_POINTS} returned whole; "
                "pass reduce='min', 'max' or a callback"
            )
        values = np.empty(grid_shape)
    elif callable(reduce):
        mode = "callback"
    elif reduce in ("min", "max"):
        mode = reduce
        over_dims = tuple(dims) if over is None else ((over,) if isinstance(over, str) else tuple(over))
        for o in over_dims:
            if o not in dims:
                raise ValueError(f"over must name dimensions among {', '.join(dims)}; got {o!r}")
        keep_axes = [i for i, dname in enumerate(full_dims) if dname not in over_dims]
        red_axes = [i for i, dname in enumerate(full_dims) if dname in over_dims]
        out_shape = tuple(grid_shape[i] for i in keep_axes)
        best = np.full(out_shape, np.inf if mode == "min" else -np.inf)
        at = {o: np.full(out_shape, np.nan, dtype=object if o == "shape" else float) for o in over_dims}
    else:
        raise ValueError(f"reduce must be None, 'min', 'max' or a callable; got {reduce!r}")

    nd = d_ax.size
    d_len = min(nd, chunk_points)
    b_len = min(b_ax.size, max(1, chunk_points // d_len))
    f_len = min(f_ax.size, max(1, chunk_points // (d_len * b_len)))
    for si, sname in enumerate(shapes):
        for di, du in enumerate(duty_ax):
            laws = loss_laws(ShapeSpec(sname, 1.0, 1.0, float(du)), material,
                             Conditions(temperature=temperature, resistivity=rho, skin_effect=skin_effect))
            for b0 in range(0, b_ax.size, b_len):
                bsl = slice(b0, min(b0 + b_len, b_ax.size))
                for f0 in range(0, f_ax.size, f_len):
                    fsl = slice(f0, min(f0 + f_len, f_ax.size))
                    for t0 in range(0, nd, d_len):
                        tsl = slice(t0, min(t0 + d_len, nd))
                        block = _block_parts(laws, f_ax[fsl], b_ax[bsl], parts, rho, d_ax[tsl])
                        block = block[:, :, :, None, :]  # insert the duty axis
                        if multi_shape:
                            block = block[:, None]
                        lead = (slice(None),) + ((slice(si, si + 1),) if multi_shape else ())
                        where = lead + (fsl, bsl, slice(di, di + 1), tsl)
                        if mode is None:
                            values[where] = block
                        elif mode == "callback":
                            bc = {"part": parts}
                            if multi_shape:
                                bc["shape"] = (sname,)
                            bc.update(freq=f_ax[fsl], b_peak=b_ax[bsl], duty=duty_ax[di:di + 1], thickness=d_ax[tsl])
                            reduce(GridResult(full_dims, bc, block))
                        else:
                            _reduce_block(block, where, full_dims, coords, keep_axes, red_axes, best, at, mode)
    if mode is None:
        return GridResult(full_dims, coords, values)
    if mode == "callback":
        return None
    kept = tuple(full_dims[i] for i in keep_axes)
    red_coords = {k: coords[k] for k in kept}
    info = {"op": mode, "over": tuple(full_dims[i] for i in red_axes)}
    info.update({f"at_{k}": v for k, v in at.items()})
    return GridResult(kept, red_coords, best, info)


def _reduce_block(block, where, full_dims, coords, keep_axes, red_axes, best, at, mode):
    """Fold one block into the running min/max over the reduced axes, with the argument."""
    kept_shape = tuple(block.shape[i] for i in keep_axes)
    moved = np.moveaxis(block, red_axes, list(range(len(keep_axes), block.ndim)))
    flat = moved.reshape(kept_shape + (-1,))
    flat = np.where(np.isnan(flat), np.inf if mode == "min" else -np.inf, flat)
    arg = np.argmin(flat, axis=-1) if mode == "min" else np.argmax(flat, axis=-1)
    val = np.take_along_axis(flat, arg[..., None], axis=-1)[..., 0]
    red_shape = tuple(block.shape[i] for i in red_axes)
    red_idx = np.unravel_index(arg, red_shape)
    out_index = tuple(where[i] for i in keep_axes)
    cur = best[out_index]
    better = (val < cur) if mode == "min" else (val > cur)
    cur[better] = val[better]
    best[out_index] = cur
    for k, ax in enumerate(red_axes):
        name = full_dims[ax]
        start = where[ax].start or 0
        coord_vals = np.asarray(coords[name], dtype=object if name == "shape" else float)
        hit = coord_vals[start + red_idx[k]]
        a = at[name][out_index]
        a[better] = hit[better]
        at[name][out_index] = a
