"""Material comparison: loss at one flux and the f * B_peak reachable at one loss density."""
import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

from workbench.analysis.breakdown import breakdown
from workbench.analysis.compare import compare_materials, igse_at_unit_flux, skin_knee_frequency
from workbench.analysis.shapes import make_shape
from workbench.materials import get_material

FREQS = np.geomspace(10.0, 1e6, 60)
# magnetic constant, CODATA 2018 value of mu_0 (the revised SI): 1.25663706212e-6 N/A^2
MU_0_CODATA_2018 = 1.25663706212e-6


def _steinmetz_closed_form(m, f, b):
    # Steinmetz equation P = k f^alpha B^beta (C. P. Steinmetz, Trans. AIEE 9, 1892);
    # the iGSE reproduces it exactly for a sine (Venkatachalam et al., IEEE COMPEL 2002)
    st = m.steinmetz
    return st.k * f**st.alpha * b**st.beta


def test_sine_loss_is_the_steinmetz_equation():
    mats = [get_material(n) for n in ("M270-35A", "fe-amorphous", "mnzn-power-ferrite")]
    cmp = compare_materials(mats, "sine", b_peak=0.1, loss_density=200e3, freqs=FREQS)
    for m, c in zip(mats, cmp.curves):
        # rtol 1e-5: the sine is sampled (1024 points), the closed form is exact
        np.testing.assert_allclose(c.loss, _steinmetz_closed_form(m, FREQS, 0.1), rtol=1e-5)
        np.testing.assert_allclose(c.loss_w_kg, c.loss / m.density, rtol=1e-12)


def test_sine_flux_at_loss_density_solves_the_steinmetz_equation():
    m = get_material("nanocrystalline")
    cmp = compare_materials([m], "sine", b_peak=0.1, loss_density=300e3, freqs=FREQS)
    c = cmp.curves[0]
    st = m.steinmetz
    # Steinmetz equation solved for B (closed form), capped at saturation (common practice, no source)
    b = (300e3 / (st.k * FREQS**st.alpha)) ** (1 / st.beta)
    # rtol 1e-5: the sine is sampled (1024 points), the closed form is exact
    np.testing.assert_allclose(c.b_loss_limited, b, rtol=1e-5)
    np.testing.assert_allclose(c.b_usable, np.minimum(b, m.b_sat), rtol=1e-5)
    np.testing.assert_array_equal(c.saturation_limited, b > m.b_sat)
    np.testing.assert_allclose(c.fb, FREQS * np.minimum(b, m.b_sat), rtol=1e-5)
    assert c.saturation_limited[0] and not c.saturation_limited[-1]


@pytest.mark.parametrize("duty", [0.2, 0.5, 0.7])
def test_triangle_matches_the_igse_closed_form(duty):
    m = get_material("fe-amorphous")
    st = m.steinmetz
    # Venkatachalam et al., IEEE COMPEL 2002: k_i = k / ((2 pi)^(alpha-1) int_0^2pi |cos t|^alpha 2^(beta-alpha) dt)
    integral, _ = quad(lambda t: abs(np.cos(t)) ** st.alpha, 0, 2 * np.pi, limit=200)
    k_i = st.k / ((2 * np.pi) ** (st.alpha - 1) * integral * 2 ** (st.beta - st.alpha))
    # and for a triangle of duty D: P = k_i (2B)^beta f^alpha (D^(1-alpha) + (1-D)^(1-alpha))
    b = 0.2
    expected = k_i * (2 * b) ** st.beta * FREQS**st.alpha * (duty ** (1 - st.alpha) + (1 - duty) ** (1 - st.alpha))
    cmp = compare_materials([m], "triangle", b_peak=b, loss_density=1e5, duty=duty, freqs=FREQS)
    np.testing.assert_allclose(cmp.curves[0].loss, expected, rtol=1e-6)
    # the flux at a loss density inverts the same closed form
    b_at = (1e5 / (expected / b**st.beta)) ** (1 / st.beta)
    np.testing.assert_allclose(cmp.curves[0].b_loss_limited, b_at, rtol=1e-6)


def test_unit_flux_loss_scales_as_f_alpha_b_beta():
    m = get_material("nanocrystalline")  # no relaxation data: the pure iGSE
    st = m.steinmetz
    p1 = igse_at_unit_flux(m, "trapezoid", duty=0.3)
    cmp = compare_materials([m], "trapezoid", b_peak=0.15, loss_density=1e5, duty=0.3, freqs=FREQS)
    # homogeneity of the iGSE integrand in time and flux (Venkatachalam et al., IEEE COMPEL 2002)
    np.testing.assert_allclose(cmp.curves[0].loss, p1 * FREQS**st.alpha * 0.15**st.beta, rtol=1e-12)


def test_relaxation_material_flux_at_budget_gives_the_budget_back():
    # the ferrite has i2GSE relaxation data: its loss is no single power of B, so the flux
    # at the budget is found numerically; putting it back through breakdown must give the budget
    m = get_material("mnzn-power-ferrite")
    cmp = compare_materials([m], "trapezoid", b_peak=0.1, loss_density=2e5, duty=0.8, freqs=[5e4, 1e5], temperature=60)
    assert cmp.curves[0].loss_model == "i2GSE"
    for f, b in zip(cmp.freq, cmp.curves[0].b_loss_limited):
        back = breakdown(make_shape("trapezoid", b_peak=float(b), freq=float(f), duty=0.8), m, temperature=60)
        assert back.total == pytest.approx(2e5, rel=1e-9)


def test_valid_masks_follow_the_fitted_ranges():
    m = get_material("fe-amorphous")
    cmp = compare_materials([m], "sine", b_peak=0.5, loss_density=2e5, freqs=FREQS)
    c = cmp.curves[0]
    f_lo, f_hi = m.steinmetz.freq_range
    b_lo, b_hi = m.steinmetz.b_range
    in_f = (FREQS >= f_lo) & (FREQS <= f_hi)  # common practice, no source: no extrapolation outside the fit
    np.testing.assert_array_equal(c.loss_valid, in_f)
    np.testing.assert_array_equal(c.fb_valid, in_f & (c.b_usable >= b_lo) & (c.b_usable <= b_hi))
    # a flux outside the fitted range makes the whole loss curve invalid and says so
    out = compare_materials([m], "sine", b_peak=1.2, loss_density=2e5, freqs=FREQS)
    assert not out.curves[0].loss_valid.any()
    assert any("outside its fitted flux range" in n for n in out.notes)
    assert not any("exceeds its saturation" in n for n in out.notes)
    above = compare_materials([m], "sine", b_peak=1.1 * m.b_sat, loss_density=2e5, freqs=FREQS)
    assert any("exceeds its saturation" in n for n in above.notes)


def test_best_at_and_peak_fb():
    mats = [get_material(n) for n in ("fe-amorphous", "nanocrystalline", "mnzn-power-ferrite")]
    cmp = compare_materials(mats, "sine", b_peak=0.1, loss_density=2e5, freqs=FREQS)
    i = int(np.argmin(np.abs(np.log(FREQS / 5e4))))
    valid = [c for c in cmp.curves if c.fb_valid[i]]
    assert cmp.best_at(5e4, by="fb") == max(valid, key=lambda c: c.fb[i]).material
    valid_loss = [c for c in cmp.curves if c.loss_valid[i]]
    assert cmp.best_at(5e4, by="loss") == min(valid_loss, key=lambda c: c.loss[i]).material
    f, fb = cmp.peak_fb("nanocrystalline")
    c = cmp.curve("nanocrystalline")
    assert fb == pytest.approx(np.max(c.fb[c.fb_valid]))
    assert c.freq_range[0] <= f <= c.freq_range[1]
    d = cmp.to_dict()
    assert [x["material"] for x in d["materials"]] == ["fe-amorphous", "nanocrystalline", "mnzn-power-ferrite"]
    with pytest.raises(ValueError, match="'M800-65A' is not in this comparison"):
        cmp.curve("M800-65A")


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"materials": []}, "at least one material"),
        ({"b_peak": -0.1}, "b_peak must be finite and positive, got -0.1"),
        ({"loss_density": float("nan")}, "loss_density must be finite and positive"),
        ({"freqs": [10.0, -5.0]}, "freqs must be a 1-D array"),
        ({"shape": "square"}, "shape must be one of"),
    ],
)
def test_bad_input_names_the_parameter(kwargs, match):
    args = {"materials": [get_material("fe-amorphous")], "b_peak": 0.1, "loss_density": 1e5}
    args.update(kwargs)
    mats = args.pop("materials")
    with pytest.raises(ValueError, match=match):
        compare_materials(mats, args.pop("shape", "sine"), **args)


def test_duplicate_materials_are_refused():
    m = get_material("fe-amorphous")
    with pytest.raises(ValueError, match="fe-amorphous more than once"):
        compare_materials([m, m], b_peak=0.1, loss_density=1e5)


@pytest.mark.parametrize(("rho", "d", "mu_r"), [(5.5e-7, 0.35e-3, 4500.0), (1.3e-6, 25e-6, 5000.0), (1e-7, 0.5e-3, 1000.0)])
def test_skin_knee_is_where_the_sheet_is_three_skin_depths(rho, d, mu_r):
    # skin depth delta = sqrt(rho / (pi f mu_0 mu_r)) (Lammeraner & Stafl, Eddy Currents, 1966, ch. 2);
    # the f^2 and f^1.5 asymptotes of the classical loss meet at d = 3 delta (same source, ch. 4)
    def gap(log_f):
        return np.sqrt(rho / (np.pi * np.exp(log_f) * MU_0_CODATA_2018 * mu_r)) - d / 3

    expected = np.exp(brentq(gap, np.log(1e-3), np.log(1e12), xtol=1e-14))
    assert skin_knee_frequency(rho, d, mu_r) == pytest.approx(expected, rel=1e-8)


def test_skin_knee_rejects_bad_values():
    with pytest.raises(ValueError, match="thickness must be finite and positive, got 0"):
        skin_knee_frequency(5e-7, 0, 4000)
