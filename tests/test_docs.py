"""The documentation cannot drift from the code.

- ``docs/scenario-reference.md`` is exactly what the loader's schema generates.
- Every scenario key that ``docs/physics.md`` names in backticks
  (``section.key`` or ``mechanics[0].key``) exists in the schema.
- Relative links in the docs and module paths in ``DEVELOPERS.md`` resolve.
- The heterodyne sign convention that ``docs/physics.md`` states holds for the
  state-space model, and the FFT sign trap it warns about is real.
"""

import difflib
import re
from pathlib import Path

import numpy as np
import pytest

from simulator import schema
from simulator.physics import angular
from simulator.scenario import Scenario, load_scenario
from simulator.steady_state import steady_state
from simulator.system import System

REPO = Path(__file__).resolve().parents[1]
DOCS = REPO / "docs"
REGENERATE = ".venv/bin/python -m simulator.schema > docs/scenario-reference.md"

# `section.key` or `section[i].key` inside backticks; i may be a digit or a letter.
KEY_MENTION = re.compile(r"`([a-z_]+)(?:\[\w+\])?\.([a-z_]+)`")


def schema_keys():
    """Section name → set of its key names, read from the loader's schema."""
    keys = {}
    for f in schema.public_fields(Scenario):
        kind, cls, _ = schema.field_kind(Scenario, f.name)
        if kind != "scalar":
            keys[f.name] = {sub.name for sub in schema.public_fields(cls)}
    return keys


def key_problems(text):
    """Scenario-key mentions in ``text`` that the schema does not have.

    A mention whose first part is a section must name a key of that section.
    A first part that is not a section but close to one (a typo such as
    ``drvie``) is also reported; anything else (``simulator.model``,
    ``demo.toml``) is not a scenario key and is ignored.
    """
    keys = schema_keys()
    problems, checked = [], 0
    for section, key in KEY_MENTION.findall(text):
        if section in keys:
            checked += 1
            if key not in keys[section]:
                close = difflib.get_close_matches(key, sorted(keys[section]), n=1)
                hint = f" (did you mean {section}.{close[0]}?)" if close else ""
                problems.append(f"{section}.{key}: no key {key!r} in [{section}]{hint}")
        elif difflib.get_close_matches(section, list(keys), n=1, cutoff=0.8):
            problems.append(f"{section}.{key}: no section [{section}]")
    return problems, checked


def test_scenario_reference_matches_schema():
    path = DOCS / "scenario-reference.md"
    expected = schema.reference_markdown(Scenario)
    actual = path.read_text(encoding="utf-8") if path.exists() else ""
    if actual != expected:
        diff = "\n".join(difflib.unified_diff(
            actual.splitlines(), expected.splitlines(), "docs/scenario-reference.md",
            "generated from the schema", lineterm="", n=1))
        pytest.fail(f"docs/scenario-reference.md disagrees with the loader's schema; "
                    f"regenerate it with\n    {REGENERATE}\n{diff[:3000]}")


def test_reference_lists_every_key():
    text = (DOCS / "scenario-reference.md").read_text(encoding="utf-8")
    for section, names in schema_keys().items():
        assert f"[{section}]" in text
        for name in names:
            assert f"| `{name}` |" in text, f"{section}.{name} missing from the reference"


def test_key_checker_catches_drift():
    problems, checked = key_problems(
        "`drive.power_w` `drive.power_mw` `drvie.power_w` `mechanics[0].coupling_hz` "
        "`simulator.model` `demo.toml`")
    assert checked == 3
    assert len(problems) == 2
    assert "drive.power_mw" in problems[0] and "drive.power_w" in problems[0]
    assert "drvie" in problems[1]


@pytest.mark.parametrize("name", ["physics.md", "index.md", "../DEVELOPERS.md"])
def test_scenario_keys_in_docs_exist(name):
    problems, checked = key_problems((DOCS / name).read_text(encoding="utf-8"))
    assert not problems, f"docs/{name} names scenario keys the loader does not have:\n" + \
        "\n".join(problems)
    if name == "physics.md":
        assert checked >= 10, "physics.md should name the scenario keys it explains"


LINK = re.compile(r"\]\(([^)#\s]+)(?:#[^)]*)?\)")


@pytest.mark.parametrize("path", sorted(DOCS.glob("*.md")) + [REPO / "DEVELOPERS.md"],
                         ids=lambda p: p.name)
def test_relative_links_resolve(path):
    text = path.read_text(encoding="utf-8")
    broken = [target for target in LINK.findall(text)
              if "://" not in target and not (path.parent / target).exists()]
    assert not broken, f"{path.name}: links to missing files {broken}"


def test_developer_guide_names_real_modules():
    text = (REPO / "DEVELOPERS.md").read_text(encoding="utf-8")
    named = set(re.findall(r"`(simulator/[\w/]+\.py)`", text))
    assert len(named) >= 8, "DEVELOPERS.md should tour the modules of the pipeline"
    missing = sorted(p for p in named if not (REPO / p).exists())
    assert not missing, f"DEVELOPERS.md names modules that do not exist: {missing}"


def test_heterodyne_sign_convention_of_the_state_space():
    """ν > 0 carries the anti-Stokes photons (∝ n), ν < 0 the Stokes ones (∝ n + 1).

    For z = X_out + iY_out ∝ a_out the symmetrised spectrum from
    ``StateSpace.output_spectrum`` is S_z(ω) = 1 + 2N(ω), with N the
    normal-ordered output photon-flux density. With vacuum inputs at the
    cavity, the sideband fluxes are the weak-coupling rates times the
    occupations, (κ_ex/κ)·A−·n on the anti-Stokes side and (κ_ex/κ)·A+·(n + 1)
    on the Stokes side (Marquardt, Chen, Clerk, Girvin, PRL 99, 093902 (2007);
    Safavi-Naeini et al., PRL 108, 033602 (2012)). A wrong sign
    convention swaps them, a factor of about 40 here.
    """
    demo = load_scenario(REPO / "simulator" / "data" / "demo.toml")
    scenario = demo.replace("drive.power_w", demo.drive.power_w / 20)  # g/κ ≈ 0.02
    system = System(scenario)
    model = system.model
    mode = steady_state(system).modes[0]
    centre = angular(mode.effective_frequency_hz)
    width = angular(mode.effective_linewidth_hz)
    offsets = np.linspace(-300 * width, 300 * width, 60001)
    flux = {}
    for side in (+1, -1):
        omega = side * centre + offsets
        s = model.output_spectrum(omega)
        s_z = (s[:, 0, 0] + s[:, 1, 1] + 1j * (s[:, 1, 0] - s[:, 0, 1])).real
        flux[side] = np.trapezoid((s_z - 1) / 2, omega) / (2 * np.pi)
    escape = scenario.cavity.external_linewidth_hz / scenario.cavity.linewidth_hz
    n = mode.occupation
    anti_stokes = escape * angular(mode.anti_stokes_rate_hz) * n
    stokes = escape * angular(mode.stokes_rate_hz) * (n + 1)
    assert flux[+1] == pytest.approx(anti_stokes, rel=0.01)
    assert flux[-1] == pytest.approx(stokes, rel=0.01)


def test_fft_sign_trap_is_real():
    """numpy's forward FFT puts e^(−iνt), i.e. anti-Stokes light, at −ν.

    numpy documents the forward transform A_k = Σ_m a_m exp(−2πi mk/n)
    (numpy.fft module documentation), the opposite kernel to the physics
    convention x(t) = ∫dω/2π e^(−iωt) x(ω) of docs/physics.md.
    """
    rate, nu, n = 1000.0, 125.0, 1000
    t = np.arange(n) / rate
    z = np.exp(-2j * np.pi * nu * t)
    freqs = np.fft.fftfreq(n, 1 / rate)
    assert freqs[np.argmax(np.abs(np.fft.fft(z)))] == pytest.approx(-nu)
    assert freqs[np.argmax(np.abs(np.fft.fft(np.conj(z))))] == pytest.approx(nu)
