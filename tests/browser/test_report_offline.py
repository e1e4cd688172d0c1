"""The exported report opens offline: headless Chromium with every network request aborted loads the
HTML file and shows the numbers (inputs, result table, crossover) and interactive plots that are drawn.

Needs Debian's Chromium (``apt-get install chromium``); skips without it outside CI.
"""
from __future__ import annotations

import os
import re

import pytest

from .labkit import ARTIFACTS, CHROMIUM_ARGS, chromium_path, ink

pytestmark = [pytest.mark.browser]


def _context():
    chromium = chromium_path()
    if chromium is None:
        if os.environ.get("CI", "").lower() in ("1", "true", "yes"):
            pytest.fail("Chromium is missing in CI: apt-get install chromium fonts-dejavu-core")
        pytest.skip("browser test skipped: Chromium not found; apt-get install chromium fonts-dejavu-core")
    pytest.importorskip("playwright")
    return chromium


def test_panel_report_opens_offline_with_numbers_and_plots(tmp_path):
    pytest.importorskip("ipywidgets")
    chromium = _context()
    from playwright.sync_api import sync_playwright

    from workbench.ui import FrequencyPanel

    panel = FrequencyPanel("M400-50A", b_peak=1.0, operating_freqs="50, 400", volume="12 cm3")
    panel.controls.thickness_mm.value = 0.2
    paths = panel.export(tmp_path, "crossover-study")
    crossover = panel.view.crossover_freq
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    blocked = []
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=chromium, headless=True, args=CHROMIUM_ARGS)
        try:
            context = browser.new_context(viewport={"width": 1200, "height": 1600})

            def refuse(route):
                blocked.append(route.request.url)
                route.abort()

            # only the file itself may load: anything else (a CDN, fonts) is aborted and recorded
            context.route(re.compile(r"^(?!file:|data:|blob:).*"), refuse)
            page = context.new_page()
            page.goto(paths["html"].resolve().as_uri())
            page.wait_for_function(
                "() => window.Bokeh && Bokeh.documents.length > 0 && "
                "Bokeh.documents[0].get_model_by_name('loss_vs_frequency') !== null", timeout=60_000)
            text = page.inner_text("body")
            # inputs with units, material and provenance, version, the crossover statement, the readout table
            for needle in ("M400-50A", "Provenance", "1.000 T", "0.2000 mm", "12.00 cm³", "skin effect",
                           "Crossover at", "Skin-effect knee", "temperature rise", "hazardous voltages"):
                assert needle in text, needle
            from workbench.report.numbers import eng

            assert f"Crossover at {eng(crossover, 'Hz', 4)}" in text
            assert re.search(r"50\.00 Hz", text) and re.search(r"400\.0 Hz", text)
            assert page.locator(".fluxheat-version").inner_text().strip()
            n = page.evaluate("""() => {
                const fig = Bokeh.documents[0].get_model_by_name('loss_vs_frequency');
                const r = fig.renderers.find(r => r.data_source && r.data_source.get_length() > 0);
                return r.data_source.get_length();
            }""")
            assert n == 400
            canvas = page.locator(".bk-Canvas canvas").first
            canvas.wait_for(timeout=30_000)
            assert ink(canvas.screenshot()) > 2000, "the report's plot looks blank"
            page.screenshot(path=str(ARTIFACTS / "report_offline.png"), full_page=True)
        finally:
            browser.close()
    assert blocked == [], f"the report asked the network for {blocked}"


def test_axis_ticks_on_a_narrow_log_range_and_a_linear_megahertz_axis(tmp_path):
    """20 Hz - 2 kHz on a log axis has 1-2-5 ticks (not only 100 and 1k); a linear axis reads 1M, not 1m."""
    chromium = _context()
    import numpy as np
    from playwright.sync_api import sync_playwright

    from workbench.report import build_record, write_report

    f = np.geomspace(20, 2000, 50)
    lin = np.linspace(0, 1.5e6, 50)
    rec = build_record("ticks", {}, {}, title="tick check (invented numbers)",
                       series={"f_hz": f, "p_w_m3": f ** 1.6, "flin_hz": lin, "w_j_m3": 1 + lin / 1e5},
                       plots=[{"name": "narrow_log", "title": "log", "x": "f_hz", "ys": [("p_w_m3", "P")],
                               "x_label": "f [Hz]", "y_label": "P [W/m³]", "x_unit": "Hz", "y_unit": "W/m3",
                               "x_log": True, "y_log": True},
                              {"name": "linear_mhz", "title": "linear", "x": "flin_hz", "ys": [("w_j_m3", "W")],
                               "x_label": "f [Hz]", "y_label": "W [J/m³]", "x_unit": "Hz", "y_unit": "J/m3"}])
    path = write_report(rec, tmp_path / "ticks.html")
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=chromium, headless=True, args=CHROMIUM_ARGS)
        try:
            context = browser.new_context()
            context.route(re.compile(r"^(?!file:|data:|blob:).*"), lambda route: route.abort())
            page = context.new_page()
            page.goto(path.resolve().as_uri())
            page.wait_for_function("() => window.Bokeh && Bokeh.documents.length > 0", timeout=60_000)
            got = page.evaluate("""() => {
                const doc = Bokeh.documents[0];
                const log = doc.get_model_by_name('narrow_log'), lin = doc.get_model_by_name('linear_mhz');
                const ax = log.below[0];
                const major = ax.ticker.get_ticks(20, 2000, log.x_range, NaN).major;
                return {major: major, labels: ax.formatter.doFormat(major, {loc: 0}),
                        lin: lin.below[0].formatter.doFormat([0, 500000, 1000000, 1500000], {loc: 0})};
            }""")
        finally:
            browser.close()
    assert got["major"] == [20, 50, 100, 200, 500, 1000, 2000]
    assert got["labels"] == ["20", "50", "100", "200", "500", "1k", "2k"]
    assert got["lin"] == ["0", "500k", "1M", "1.5M"]  # M is mega (SI Brochure, 9th ed., Table 7)
