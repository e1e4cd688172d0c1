"""Tests of workbench.analysis.grid: loss parts over frequency x flux x duty x thickness.

Independent checks, each with its source beside it: the thin-sheet classical eddy formula and
the Steinmetz/iGSE closed forms (Bertotti 1988; Venkatachalam et al. 2002), with constants
integrated here by scipy. Agreement with the frequency sweep at the same settings is the
specified contract of the grid (same per-shape laws), checked point by point.
"""
from __future__ import annotations

import tracemalloc

import numpy as np
import pytest
from scipy.integrate import quad

from workbench.analysis import sweep_frequency
from workbench.analysis.grid import GRID_PARTS, grid_sweep
from workbench.materials import get_material

STEEL = "M330-35A"  # has a separation set
FERRITE = "mnzn-power-ferrite"  # no separation set; relaxation data and temperature factor


@pytest.fixture(scope="module")
def steel():
    return get_material(STEEL)


@pytest.mark.parametrize("shape, duty", [("sine", 0.5), ("triangle", 0.3), ("trapezoid", 0.6)])
def test_grid_points_equal_frequency_sweep(steel, shape, duty):
    freqs = np.geomspace(20, 2e5, 37)
    th = [0.2e-3, 0.35e-3, 0.5e-3]
    g = grid_sweep(steel, freq=freqs, b_peak=[0.2, 1.1], duty=[duty, 0.45], thickness=th, shape=shape, chunk_points=50)
    for b in (0.2, 1.1):
        for d in th:
            s = sweep_frequency(steel, shape, b_peak=b, duty=duty, freqs=freqs, thickness=d)
            for part in GRID_PARTS:
                np.testing.assert_allclose(g.sel(part=part, b_peak=b, duty=duty, thickness=d), getattr(s, part), rtol=1e-9)


def test_ferrite_without_separation_and_with_relaxation_equals_sweep():
    ferrite = get_material(FERRITE)
    freqs = np.geomspace(1e4, 5e5, 11)
    g = grid_sweep(ferrite, freq=freqs, b_peak=[0.05, 0.1], duty=[0.4], shape="trapezoid", temperature=80.0)
    s = sweep_frequency(ferrite, "trapezoid", b_peak=0.1, duty=0.4, freqs=freqs, temperature=80.0)
    np.testing.assert_allclose(g.sel(part="total", b_peak=0.1)[:, 0, 0], s.total, rtol=1e-9)
    np.testing.assert_allclose(g.sel(part="classical", b_peak=0.1)[:, 0, 0], s.classical, rtol=1e-9)
    assert np.isnan(g.part("hysteresis")).all()
    assert np.isnan(g.part("separation_total")).all()


def test_sine_closed_forms_without_skin_effect(steel):
    freqs = np.array([50.0, 400.0, 2000.0])
    b = np.array([0.5, 1.0, 1.5])
    d = np.array([0.25e-3, 0.5e-3])
    g = grid_sweep(steel, freq=freqs, b_peak=b, thickness=d, skin_effect=False)
    f3, b3, d3 = np.meshgrid(freqs, b, d, indexing="ij")
    rho = steel.resistivity
    # Bertotti, IEEE Trans. Magn. 24(1), 1988, eq. (2): thin sheet, sine
    classical = np.pi**2 * d3**2 * f3**2 * b3**2 / (6 * rho)
    np.testing.assert_allclose(g.part("classical")[:, :, 0, :], classical, rtol=1e-12)  # the sine's closed form
    sep = steel.separation
    # Bertotti 1988: hysteresis k_h f B^beta_h for a single loop of amplitude B
    np.testing.assert_allclose(g.part("hysteresis")[:, :, 0, :], sep.k_hyst * f3 * b3**sep.beta_hyst, rtol=1e-5)
    # Bertotti 1988, eq. (9): excess k_e (2 pi)^1.5 <|cos|^1.5> (f B)^1.5, mean by scipy quad
    mean_cos, _ = quad(lambda th: abs(np.cos(th)) ** 1.5, 0, 2 * np.pi)
    c_exc = (2 * np.pi) ** 1.5 * mean_cos / (2 * np.pi)
    np.testing.assert_allclose(g.part("excess")[:, :, 0, :], sep.k_excess * c_exc * (f3 * b3) ** 1.5, rtol=1e-4)
    st = steel.steinmetz
    # Venkatachalam et al., IEEE COMPEL 2002: the iGSE of a sine is k f^alpha B^beta; a thickness
    # other than the material's replaces the thin-sheet classical part (Bertotti 1988, eq. (2))
    d0 = steel.thickness
    replaced = st.k * f3**st.alpha * b3**st.beta + np.pi**2 * (d3**2 - d0**2) * f3**2 * b3**2 / (6 * rho)
    np.testing.assert_allclose(g.part("total")[:, :, 0, :], np.maximum(replaced, classical), rtol=1e-9)


def test_triangle_classical_closed_form(steel):
    # thin-sheet classical loss d^2/(12 rho) <(dB/dt)^2>; for a triangle of duty D,
    # <(dB/dt)^2> = 4 B^2 f^2 (1/D + 1/(1-D)) (closed form, common practice, no source)
    freqs = np.array([100.0, 1e3])
    duties = np.array([0.2, 0.5, 0.7])
    g = grid_sweep(steel, freq=freqs, b_peak=0.8, duty=duties, thickness=0.35e-3, shape="triangle", skin_effect=False)
    f2, d2 = np.meshgrid(freqs, duties, indexing="ij")
    expected = (0.35e-3) ** 2 / (12 * steel.resistivity) * 4 * 0.8**2 * f2**2 * (1 / d2 + 1 / (1 - d2))
    np.testing.assert_allclose(g.part("classical")[:, 0, :, 0], expected, rtol=1e-9)


def test_min_and_max_reductions_equal_full_grid(steel):
    kw = dict(freq=np.geomspace(50, 5e4, 13), b_peak=[0.3, 0.9, 1.4], duty=[0.25, 0.5, 0.8],
              thickness=[0.2e-3, 0.5e-3], shape="triangle", chunk_points=7)
    full = grid_sweep(steel, **kw)
    for op, fn, argfn in (("min", np.min, np.argmin), ("max", np.max, np.argmax)):
        red = grid_sweep(steel, reduce=op, over=("duty", "thickness"), **kw)
        assert red.dims == ("part", "freq", "b_peak")
        np.testing.assert_array_equal(red.values, fn(full.values, axis=(3, 4)))
        flat = full.values.reshape(full.values.shape[:3] + (-1,))
        i_duty, i_th = np.unravel_index(argfn(flat, axis=-1), (3, 2))
        np.testing.assert_array_equal(red.reduced["at_duty"], np.asarray(kw["duty"])[i_duty])
        np.testing.assert_array_equal(red.reduced["at_thickness"], np.asarray(kw["thickness"])[i_th])
        whole = grid_sweep(steel, reduce=op, **kw)
        np.testing.assert_array_equal(whole.values, fn(full.values.reshape(5, -1), axis=1))


def test_callback_sees_every_point_once(steel):
    kw = dict(freq=np.geomspace(50, 5e3, 9), b_peak=[0.3, 0.9], duty=[0.3, 0.6], thickness=[0.3e-3], shape=["sine", "triangle"])
    full = grid_sweep(steel, **kw)
    assert full.dims == ("part", "shape", "freq", "b_peak", "duty", "thickness")
    seen = np.full(full.shape, np.nan)
    count = np.zeros(full.shape, int)

    def collect(block):
        idx = [slice(None)]
        for dim in block.dims[1:]:
            coord = list(full.coords[dim])
            pos = [coord.index(x) for x in block.coords[dim]]
            idx.append(slice(pos[0], pos[-1] + 1))
        seen[tuple(idx)] = block.values
        count[tuple(idx)] += 1

    assert grid_sweep(steel, reduce=collect, chunk_points=5, **kw) is None
    assert (count == 1).all()
    np.testing.assert_allclose(seen, full.values, rtol=1e-13)  # chunking may change the last bit of a sum


def test_large_grid_with_reducer_keeps_memory_bounded(steel):
    # 4 million points x 5 parts would take 160 MB materialised
    kw = dict(freq=np.geomspace(10, 1e5, 400), b_peak=np.linspace(0.1, 1.5, 50), duty=np.linspace(0.2, 0.8, 5),
              thickness=np.linspace(0.1e-3, 0.65e-3, 40), shape="triangle", skin_effect=False)
    full_bytes = 5 * 400 * 50 * 5 * 40 * 8
    tracemalloc.start()
    try:
        red = grid_sweep(steel, reduce="max", chunk_points=20_000, **kw)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < full_bytes / 20, f"peak {peak} bytes"
    # the maximum of every part sits at the top of the frequency and flux axes
    np.testing.assert_array_equal(red.reduced["at_freq"], 1e5)
    np.testing.assert_array_equal(red.reduced["at_b_peak"], 1.5)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        (dict(freq=[50, -1]), r"freq\[1\]"),
        (dict(b_peak=np.nan), "b_peak"),
        (dict(duty=1.5), "duty"),
        (dict(shape="square"), "shape"),
        (dict(parts=("total", "copper")), "parts"),
        (dict(reduce="mean"), "reduce"),
        (dict(reduce="min", over=("temperature",)), "over"),
        (dict(chunk_points=0), "chunk_points"),
        (dict(freq=np.ones(100_000), b_peak=np.ones(200)), "reduce="),
    ],
)
def test_bad_input_names_the_parameter(steel, kwargs, message):
    args = dict(freq=[50.0], b_peak=[1.0])
    args.update(kwargs)
    with pytest.raises(ValueError, match=message):
        grid_sweep(steel, **args)
