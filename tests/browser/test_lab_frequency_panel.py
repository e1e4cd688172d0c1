"""End to end in a real browser: JupyterLab serves a copy of notebook 02, headless Chromium runs it,
the frequency panel renders, a slider moves and the crossover frequency shown in the page changes.

Needs Debian's Chromium (``apt-get install chromium``); never a browser downloaded by Playwright.
Outside CI the test skips when Chromium is missing; in CI (``CI=true``) that is a failure.
A screenshot of the panel is saved under ``artifacts/browser/``. The server and browser come from
``labkit`` (shared with the other panel checks).
"""
from __future__ import annotations

import os
import re
import time

import pytest

from .labkit import ARTIFACTS, NOTEBOOKS, chromium_path, ink, lab_server, launch, open_and_run, wait_idle

pytestmark = [pytest.mark.browser, pytest.mark.slow]

NOTEBOOK = NOTEBOOKS / "02_eddy_vs_hysteresis_crossover.ipynb"
HOW_TO_ENABLE = "install Debian's Chromium to run it: apt-get install chromium fonts-dejavu-core"


def _in_ci() -> bool:
    return os.environ.get("CI", "").lower() in ("1", "true", "yes")


def _chromium() -> str:
    path = chromium_path()
    if path is None:
        if _in_ci():
            pytest.fail(f"Chromium is missing in CI: {HOW_TO_ENABLE} (.ci/run does this)")
        pytest.skip(f"browser test skipped: Chromium not found; {HOW_TO_ENABLE}")
    return path


@pytest.fixture
def server(tmp_path):
    with lab_server([NOTEBOOK], workdir=tmp_path) as srv:
        yield srv


_CROSSOVER_HZ = re.compile(r"Crossover at ([0-9.]+) (k?)Hz")


def _crossover_hz(text: str) -> float:
    m = _CROSSOVER_HZ.search(text)
    assert m, f"no crossover frequency in {text!r}"
    return float(m.group(1)) * (1e3 if m.group(2) else 1.0)


def test_frequency_panel_renders_and_responds(server):
    chromium = _chromium()
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        if _in_ci():
            raise
        pytest.skip("browser test skipped: playwright (Python) is not installed; pip install playwright")
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    with sync_playwright() as pw:
        browser, context = launch(pw, chromium, height=1400)
        try:
            page = context.new_page()
            open_and_run(page, server, NOTEBOOK.name)
            # the panel's crossover line appears once the kernel has built the widgets
            crossover = page.locator(".fluxheat-crossover")
            crossover.first.wait_for(timeout=120_000)
            page.wait_for_function(
                "() => window.Bokeh && Bokeh.documents.some(d => d.get_model_by_name('loss_vs_frequency'))",
                timeout=60_000)
            wait_idle(server)
            # the last cell set the thickness to 0.20 mm: 865 Hz (the notebook prints the same)
            try:
                page.wait_for_function(
                    "() => [...document.querySelectorAll('.fluxheat-crossover')].some(e => e.textContent.includes('865'))",
                    timeout=30_000)
            except Exception:
                raise AssertionError(f"crossover texts in the page: {crossover.all_inner_texts()}") from None
            assert crossover.count() == 1, crossover.all_inner_texts()
            before = crossover.first.inner_text()

            n_points = page.evaluate("""() => {
                const doc = Bokeh.documents.find(d => d.get_model_by_name('loss_vs_frequency'));
                const fig = doc.get_model_by_name('loss_vs_frequency');
                const r = fig.renderers.find(r => r.data_source && r.data_source.data.freq);
                return r.data_source.get_length();
            }""")
            assert n_points == 400

            panel = page.locator(".fluxheat-panel-frequency-sweep").first
            canvas = panel.locator(".bk-Canvas canvas").first
            canvas.wait_for(timeout=30_000)
            ink_before = ink(canvas.screenshot())
            assert ink_before > 2000, "the loss plot looks blank"

            slider = panel.locator(".widget-slider", has=page.locator(".widget-label", has_text="thickness d [mm]"))
            handle = slider.locator(".noUi-handle").first
            handle.focus()
            for _ in range(15):
                handle.press("ArrowRight")
            page.wait_for_function(
                "(old) => document.querySelector('.fluxheat-crossover').textContent.trim() !== old.trim()", arg=before,
                timeout=30_000)
            wait_idle(server)
            # the key presses send several updates: wait until the dashed crossover marker in the
            # plot and the number in the text describe the same (last) state, then compare them
            marker_js = """() => {
                const doc = Bokeh.documents.find(d => d.get_model_by_name('crossover_marker'));
                const m = doc.get_model_by_name('crossover_marker');
                return [m.location, m.visible];
            }"""
            settle = time.monotonic() + 30
            while True:
                after = crossover.first.inner_text()
                marker = page.evaluate(marker_js)
                agree = marker[1] and marker[0] == pytest.approx(_crossover_hz(after), rel=2e-3)
                if agree or time.monotonic() > settle:
                    break
                time.sleep(0.25)
            # a thicker sheet has more classical eddy loss, so the crossover moves down (f_x ~ rho / d^2)
            assert _crossover_hz(after) < _crossover_hz(before), (before, after)
            assert ink(canvas.screenshot()) > 2000
            # the marker follows the number in the text
            assert marker[1] and marker[0] == pytest.approx(_crossover_hz(after), rel=2e-3), (marker, after)
            panel.screenshot(path=str(ARTIFACTS / "frequency_panel.png"))
        except BaseException:
            try:
                page.screenshot(path=str(ARTIFACTS / "frequency_panel_failure.png"))
            finally:
                raise
        finally:
            browser.close()
