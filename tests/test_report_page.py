"""The report pages, opened in a real browser (headless Chromium) at 1280 px.

Every image decodes, nothing is wider than the window, no table needs
scrolling, the console stays empty, and the page leads with the answer and
ends with the scenario folded.

Chromium (Debian package ``chromium``) is needed; `.ci/run` installs it.
Where it is absent the tests fail, unless NOISECHAIN_SKIP_BROWSER_TESTS=1
says a skip is acceptable (a machine without a browser).
"""

import json
import os
import re
import shutil
import subprocess

import numpy as np
import pytest

from simulator.scenario.loader import parse_scenario

WIDTH = 1280  # px: a laptop screen
SKIP_VARIABLE = "NOISECHAIN_SKIP_BROWSER_TESTS"
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         f"--window-size={WIDTH},900", "--enable-logging=stderr", "--v=0",
         "--virtual-time-budget=10000", "--dump-dom")
# Run in the page after it loaded; writes what it found into the DOM, which
# --dump-dom prints. Resource errors are caught in the capture phase.
PROBE = """<script>
window.__errors = [];
window.addEventListener("error", e => window.__errors.push(
  e.message || ("failed to load " + (e.target && e.target.tagName))), true);
window.addEventListener("load", () => {
  const images = Array.from(document.images);
  const wide = Array.from(document.querySelectorAll("div.table"))
    .filter(d => d.scrollWidth > d.clientWidth + 1)
    .map(d => d.querySelector("th") ? d.querySelector("th").textContent : "?");
  const out = document.createElement("pre");
  out.id = "probe-result";
  out.textContent = JSON.stringify({
    images: images.length,
    undecoded: images.filter(i => !(i.complete && i.naturalWidth > 0)).map(i => i.alt),
    pageWidth: document.documentElement.scrollWidth, window: window.innerWidth,
    tablesScrolling: wide, errors: window.__errors,
    headings: Array.from(document.querySelectorAll("h2")).map(h => h.textContent)});
  document.body.appendChild(out);
});
</script>"""


def chromium():
    """Path of the browser, or a skip/failure that says what to do."""
    path = os.environ.get("CHROMIUM") or shutil.which("chromium") or shutil.which(
        "chromium-browser")
    if path:
        return path
    if os.environ.get(SKIP_VARIABLE) == "1":
        pytest.skip(f"chromium is not installed and {SKIP_VARIABLE}=1 allows the skip")
    pytest.fail(f"chromium is not installed: `apt-get install chromium` (as .ci/run does), "
                f"or set {SKIP_VARIABLE}=1 to accept skipping the browser checks")


def render(page, tmp_path):
    """Open ``page`` in headless Chromium; what the probe found and the console lines."""
    probe = tmp_path / "probed.html"
    probe.write_text(page.read_text("utf-8").replace("<head>", "<head>" + PROBE, 1), "utf-8")
    done = subprocess.run([chromium(), *FLAGS, f"--user-data-dir={tmp_path / 'profile'}",
                           probe.as_uri()], capture_output=True, text=True, timeout=120)
    found = re.search(r'<pre id="probe-result">(.*?)</pre>', done.stdout, re.S)
    assert found, f"the page did not finish loading:\n{done.stderr[-2000:]}"
    console = [line for line in done.stderr.splitlines() if ":CONSOLE" in line]
    return json.loads(found.group(1).replace("&quot;", '"').replace("&amp;", "&")
                      .replace("&lt;", "<").replace("&gt;", ">")), console


def check_page(result, console):
    assert result["images"] > 0 and not result["undecoded"], result
    assert result["pageWidth"] <= WIDTH and result["window"] == WIDTH, result
    assert not result["tablesScrolling"], result
    assert not result["errors"] and not console, (result["errors"], console)


SMALL_RUN = """
[scenario]
name = "page-check"
description = "A small invented device for the report-page check"
seed = 7
[drive]
wavelength_m = 1550e-9
power_w = 0.25e-6
detuning_hz = -1.5e6
[cavity]
linewidth_hz = 400e3
external_linewidth_hz = 200e3
[[mechanics]]
name = "membrane"
frequency_hz = 1.5e6
linewidth_hz = 0.5
effective_mass_kg = 5e-12
coupling_hz = 200.0
bath_temperature_k = 4.0
[sweep.parameters]
"drive.detuning_hz" = { start = -1.5, stop = 0.5, num = 5, unit = "mechanics[0].frequency_hz" }
[record]
duration_s = 0.005
in_run = true
"""


def test_run_report_leads_with_the_answer_and_fits_the_screen(tmp_path):
    from simulator.workflows.run import run_scenario

    run = run_scenario(parse_scenario(SMALL_RUN, source="page-check.toml"), tmp_path / "run",
                       workers=1, progress=False,
                       best_points=[("a planner's choice", "drive power P (W) = 1e-06", "—")])
    result, console = render(run.report, tmp_path)
    check_page(result, console)
    assert result["images"] == 4  # spectrum, record, sweep occupation and stability
    headings = result["headings"]
    assert headings[:2] == ["Answer", "Figures"] and headings[-1] == "Scenario"
    text = run.report.read_text("utf-8")
    assert text.index("<details>") > text.index("Files written")
    answer = text[text.index("Answer"):text.index("Figures")]
    # the sweep's best point and the planner's, in words
    assert "a planner&#x27;s choice" in answer and "drive detuning Δ / Ωm = -1" in answer


def test_trial_report_shows_every_verdict_within_the_screen(tmp_path):
    import html

    import xarray as xr

    from simulator.report.trial_report import write_trial_report
    from simulator.workflows.trial import TrialResult, summarise

    rng = np.random.default_rng(3)
    names = ("occupation:asymmetry", "occupation:anti_stokes_area")
    est = np.column_stack([2.6 + 0.3 * rng.standard_normal(40),
                           2.9 + 0.3 * rng.standard_normal(40)])
    unc = np.full(est.shape, 0.3)
    quantities = tuple(summarise(n, est[:, j], unc[:, j], 2.6, 0) for j, n in enumerate(names))
    dataset = xr.Dataset({"estimate": (("trial", "quantity"), est),
                          "uncertainty": (("trial", "quantity"), unc)},
                         coords={"trial": np.arange(40), "quantity": list(names)},
                         attrs={"duration_s": 0.05})
    result = TrialResult(quantities=quantities, dataset=dataset, errors=(), out=tmp_path)
    page = write_trial_report(result, parse_scenario(SMALL_RUN, source="x.toml"),
                              "an estimator", tmp_path / "report.html")
    rendered, console = render(page, tmp_path)
    check_page(rendered, console)
    assert rendered["headings"][0] == "Verdicts"
    text = page.read_text("utf-8")
    lead = text[text.index("<h2>Verdicts"):text.index("<h2>Statistics")]
    assert all(html.escape(q.verdict) in lead for q in quantities)
