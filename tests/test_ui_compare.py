"""Comparison panel driven from code."""
import json

import numpy as np
import pytest

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

from workbench.materials import get_material  # noqa: E402
from workbench.ui import ComparisonPanel  # noqa: E402
from workbench.ui.style import MATERIAL_COLOURS  # noqa: E402

NAMES = ("M270-35A", "fe-amorphous", "nanocrystalline", "mnzn-power-ferrite")


@pytest.fixture
def panel():
    p = ComparisonPanel(NAMES, b_peak=0.1, loss_density="200 kW/m3", design_freq="50k")
    assert p.last_error is None
    return p


def _full_lines(inside, outside):
    return [np.where(np.isnan(a), b, a) for a, b in zip(inside["ys"], outside["ys"])]


def test_one_line_per_material_with_distinct_styles(panel):
    data = panel.loss_source.data
    assert list(data["material"]) == list(NAMES)
    styles = set(zip(data["colour"], data["dash"]))
    assert len(styles) == len(NAMES) and set(data["colour"]) <= set(MATERIAL_COLOURS)
    assert panel.loss_figure.name == "loss_by_material" and panel.fb_figure.name == "fb_by_material"


def test_sine_loss_lines_are_the_steinmetz_equation(panel):
    ys = _full_lines(panel.loss_source.data, panel.loss_source_extrapolated.data)
    f = np.asarray(panel.loss_source.data["xs"][0])
    for name, y in zip(NAMES, ys):
        st = get_material(name).steinmetz
        # Steinmetz (Trans. AIEE 9, 1892); iGSE = Steinmetz for a sine (Venkatachalam et al., COMPEL 2002).
        # rtol 1e-5: the library's sine is sampled
        np.testing.assert_allclose(y, st.k * f**st.alpha * 0.1**st.beta, rtol=1e-5)


def test_flux_slider_scales_each_line_by_b_to_the_beta(panel):
    before = _full_lines(panel.loss_source.data, panel.loss_source_extrapolated.data)
    panel.controls.b_peak.value = 0.2
    after = _full_lines(panel.loss_source.data, panel.loss_source_extrapolated.data)
    for name, a, b in zip(NAMES, before, after):
        # P proportional to B^beta at a fixed shape and frequency (Steinmetz 1892)
        np.testing.assert_allclose(b / a, 2 ** get_material(name).steinmetz.beta, rtol=1e-9)


def test_loss_density_moves_the_fb_lines(panel):
    before = _full_lines(panel.fb_source.data, panel.fb_source_extrapolated.data)
    panel.controls.loss_density.value = "400 kW/m3"
    after = _full_lines(panel.fb_source.data, panel.fb_source_extrapolated.data)
    cmp = panel.view.comparison
    for name, a, b in zip(NAMES, before, after):
        c = cmp.curve(name)
        free = ~c.saturation_limited
        # doubling the allowed loss raises B by 2^(1/beta) where saturation does not cap it (Steinmetz solved for B)
        np.testing.assert_allclose((b / a)[free], 2 ** (1 / c.beta), rtol=1e-9)


def test_valid_and_extrapolated_parts_split_the_curve(panel):
    c = panel.view.comparison.curve("fe-amorphous")
    inside = np.asarray(panel.loss_source.data["ys"][1])
    np.testing.assert_array_equal(~np.isnan(inside), c.loss_valid)


def test_summary_names_the_best_valid_material(panel):
    from workbench.analysis.compare import compare_materials

    at = compare_materials([get_material(n) for n in NAMES], b_peak=0.1, loss_density=200e3, freqs=[50e3])
    valid = [c for c in at.curves if c.fb_valid[0]]
    best = max(valid, key=lambda c: c.fb[0]).material
    assert panel.view.best_fb == best
    assert f"50.0 kHz: {best}." in panel.summary_html.value
    assert "nanocrystalline" in panel.summary_text
    panel.controls.design_freq.value = "1 Hz"  # below every fitted range
    assert "No material is inside its fitted range" in panel.summary_html.value


def test_materials_selection_changes_the_lines(panel):
    panel.controls.materials.value = ("M800-65A", "pure-iron")
    assert list(panel.fb_source.data["material"]) == ["M800-65A", "pure-iron"]
    panel.controls.materials.value = ()
    assert "select at least one material" in panel.last_error
    assert list(panel.fb_source.data["material"]) == ["M800-65A", "pure-iron"]


def test_bad_loss_density_is_named(panel):
    panel.controls.loss_density.value = "200 kW"
    assert "loss density" in panel.last_error and "'200 kW'" in panel.last_error


def test_export_long_table(panel, tmp_path):
    paths = panel.export(tmp_path)
    rec = json.loads(paths["json"].read_text())
    assert rec["kind"] == "material-comparison"
    assert [r["material"] for r in rec["results"]["at_design_frequency"]] == list(NAMES)
    lines = [x for x in paths["csv"].read_text().splitlines() if not x.startswith("#")]
    assert len(lines) == 1 + 400 * len(NAMES)
    assert "fb_by_material" in paths["html"].read_text()


def test_caution_line_is_shown(panel):
    text = " ".join(getattr(w, "value", "") for w in panel.widget.children if hasattr(w, "value"))
    assert "temperature rise" in text and "hazardous voltages" in text


# --- DC bias -------------------------------------------------------------------------------------------------
def test_dc_bias_reaches_the_comparison_and_its_warnings_are_listed(panel, monkeypatch):
    from workbench.ui import state
    from workbench.ui.controls import INVALID_CLASS

    seen = []
    real = state.compare_materials

    def spy(*args, **kwargs):
        seen.append(kwargs.get("h_dc"))
        return real(*args, **kwargs)

    monkeypatch.setattr(state, "compare_materials", spy)
    before = [r["loss_w_m3"] for r in panel.view.summary_rows]
    panel.controls.h_dc.value = "60"
    assert panel.last_error is None
    assert seen and all(h == 60.0 for h in seen)  # the curves and the design-frequency rows
    assert panel.record()["inputs"]["h_dc_a_m"] == 60.0
    # no library material has bias data: the loss is unchanged and each material is named in a warning
    assert [r["loss_w_m3"] for r in panel.view.summary_rows] == before
    for name in NAMES:
        assert any(w.startswith(f"{name} has no DC-bias data") and "60 A/m" in w for w in panel.view.warnings), name
    assert panel.notes_html.value.count("no DC-bias data") == len(NAMES)
    assert "no DC-bias data" in " ".join(panel.record()["warnings"])
    panel.controls.h_dc.value = "60 mT"
    assert INVALID_CLASS in panel.fields["h_dc"]._dom_classes and panel.stale
    panel.controls.h_dc.value = ""
    assert panel.last_error is None and not any("DC-bias" in w for w in panel.view.warnings)


def test_dc_bias_changes_a_biased_material_by_its_table(tmp_path, monkeypatch):
    import dataclasses

    from workbench.materials import SCHEMA_VERSION, BiasParams, material_to_toml

    # a bias table invented for demonstration (test data): k x 2 from 0 to 100 A/m, exponents unchanged
    m = get_material("nanocrystalline")
    src = dict(m.sources, **{f"bias.{f}": "invented for demonstration (test table)"
                             for f in ("h_dc", "k_ratio", "alpha_shift", "beta_shift")})
    biased = dataclasses.replace(m, name="biased-nano-test", sources=src,
                                 bias=BiasParams((0.0, 100.0), (1.0, 2.0), (0.0, 0.0), (0.0, 0.0)))
    path = tmp_path / "user.toml"
    path.write_text(f"schema_version = {SCHEMA_VERSION}\n\n{material_to_toml(biased)}")
    monkeypatch.setenv("WORKBENCH_USER_LIBRARY", str(path))
    panel = ComparisonPanel(("nanocrystalline", "biased-nano-test"), b_peak=0.1, design_freq="50k")
    plain = {r["material"]: r["loss_w_m3"] for r in panel.view.summary_rows}
    panel.controls.h_dc.value = "50"
    rows = {r["material"]: r["loss_w_m3"] for r in panel.view.summary_rows}
    # ln k ratio linear in H: at 50 A/m k is sqrt(1 x 2) times the unbiased k; a sine's Steinmetz loss
    # k f^alpha B^beta scales with k (Steinmetz, Trans. AIEE 9, 1892)
    assert rows["biased-nano-test"] == pytest.approx(plain["biased-nano-test"] * 2**0.5, rel=1e-9)
    assert rows["nanocrystalline"] == pytest.approx(plain["nanocrystalline"], rel=1e-12)
    assert any(w.startswith("nanocrystalline has no DC-bias data") for w in panel.view.warnings)
    assert not any("biased-nano-test has no DC-bias data" in w for w in panel.view.warnings)


def test_core_temperature_typed_in_the_panel_reaches_the_engine():
    # the warning asks for a temperature: the panel must let the user give one; the ferrite's loss at
    # 25 degC relative to its reference follows the data file's quadratic factor (read with tomllib,
    # not through the code under test)
    import tomllib
    from pathlib import Path

    from workbench.ui.compare import ComparisonPanel
    from workbench.ui.controls import INVALID_CLASS

    tc = {k: v["value"] for k, v in tomllib.loads((Path(__file__).resolve().parents[1] / "data" / "materials.toml")
                                                  .read_text())["materials"]["mnzn-power-ferrite"]["steinmetz"]
          ["temperature"].items() if k.startswith("ct")}
    panel = ComparisonPanel(materials=("mnzn-power-ferrite",))
    reference = panel.view.comparison.curves[0].loss.copy()
    assert any("no core temperature given" in w for w in panel.view.comparison.warnings)
    panel.controls.temperature.value = "25"
    warm = tc["ct1"] / (2 * tc["ct2"])
    factor = (tc["ct0"] - tc["ct1"] * 25 + tc["ct2"] * 625) / (tc["ct0"] - tc["ct1"] * warm + tc["ct2"] * warm**2)
    np.testing.assert_allclose(panel.view.comparison.curves[0].loss / reference, factor, rtol=1e-6)
    assert not any("no core temperature given" in w for w in panel.view.comparison.warnings)
    panel.controls.temperature.value = "-300"  # below absolute zero: marked at its box
    assert "temperature" in panel.last_error
    assert INVALID_CLASS in panel.fields["temperature"]._dom_classes
