"""Shared test helpers: scenarios built from plain data, and a CLI runner.

``make_scenario(**sections)`` starts from :data:`BASE`, an invented optical
scenario in the resolved-sideband regime, and merges each keyword into the
section of that name: a dict updates the section's keys (for ``mechanics`` it
updates the first mode), a list of dicts replaces the whole array of modes.
Everything goes through :func:`simulator.scenario.loader.scenario_from_dict`, so the
loader checks every helper-made scenario exactly as it checks a file.

``scenario_with_coupling`` sets the drive power so that the intracavity field
gives a chosen light-enhanced coupling g at a chosen effective detuning, which
is how most physics tests pick their regime; ``scenario_for_cubic`` sets the
dimensionless detuning and drive strength of the operating-point cubic, which
is how the bistability tests pick theirs.

Test modules import these helpers directly (``from conftest import
make_scenario``; pytest puts tests/ on sys.path). The fixtures are
session-scoped so that hypothesis tests may use them too.
"""

import copy
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import scipy.constants

from simulator.scenario.loader import scenario_from_dict

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "simulator" / "data" / "demo.toml"

# Invented baseline: 1 MHz optical cavity, 20 MHz mechanical mode (Ωm/κ = 20).
BASE = {
    "scenario": {"name": "test-base", "description": "baseline for unit tests", "seed": 7},
    "drive": {"wavelength_m": 1064e-9, "power_w": 1e-6, "detuning_hz": -20e6},
    "cavity": {"linewidth_hz": 1e6, "external_linewidth_hz": 0.5e6},
    "mechanics": [{
        "name": "m0", "frequency_hz": 20e6, "linewidth_hz": 10.0,
        "effective_mass_kg": 1e-15, "coupling_hz": 100.0, "bath_occupation": 100.0,
    }],
    "detection": {"scheme": "heterodyne", "efficiency": 0.8},
}


def scenario_dict(**sections):
    """Deep copy of :data:`BASE` with ``sections`` merged in (see module doc).

    A key set to ``None`` is removed, e.g. ``drive={"wavelength_m": None}``.
    """
    data = copy.deepcopy(BASE)
    for name, value in sections.items():
        if name == "mechanics" and isinstance(value, dict):
            data["mechanics"][0].update(value)
        elif isinstance(value, dict) and isinstance(data.get(name), dict):
            data[name].update(value)
        else:
            data[name] = copy.deepcopy(value)
    return _drop_none(data)


def make_scenario(**sections):
    """Validated scenario: :data:`BASE` with ``sections`` merged in."""
    return scenario_from_dict(scenario_dict(**sections), source="<test>")


def power_for_photon_number(photons, *, linewidth_hz, external_linewidth_hz,
                            detuning_hz, drive_frequency_hz):
    """Input power (W) that holds ``photons`` in the cavity at effective detuning Δ.

    From the steady state of the driven cavity, n̄ = κ_ex Φ / (κ²/4 + Δ²), with
    Φ = P/(h f) (common practice; e.g. Aspelmeyer, Kippenberg, Marquardt,
    Rev. Mod. Phys. 86, 1391 (2014), driven-cavity input-output relations).
    """
    k, kex, d = (2 * np.pi * x for x in (linewidth_hz, external_linewidth_hz, detuning_hz))
    flux = photons * (k**2 / 4 + d**2) / kex
    return flux * scipy.constants.h * drive_frequency_hz


def scenario_with_coupling(*, g_hz, linewidth_hz=1e6, external_linewidth_hz=None,
                           detuning_hz, modes, cavity_bath_occupation=0.0,
                           drive_frequency_hz=2.8e14):
    """Scenario whose drive gives g = g0·√n̄ = ``g_hz`` for the first mode.

    The detuning is given as the effective one (``detuning_reference =
    "effective"``), so the drift matrix sees exactly ``detuning_hz``.
    ``modes`` is the list of ``[[mechanics]]`` tables.
    """
    kex = linewidth_hz / 2 if external_linewidth_hz is None else external_linewidth_hz
    g0 = modes[0]["coupling_hz"]
    photons = (g_hz / g0) ** 2
    power = power_for_photon_number(photons, linewidth_hz=linewidth_hz,
                                    external_linewidth_hz=kex, detuning_hz=detuning_hz,
                                    drive_frequency_hz=drive_frequency_hz)
    return make_scenario(
        drive={"frequency_hz": drive_frequency_hz, "wavelength_m": None, "power_w": power,
               "detuning_hz": detuning_hz, "detuning_reference": "effective"},
        cavity={"linewidth_hz": linewidth_hz, "external_linewidth_hz": kex,
                "bath_occupation": cavity_bath_occupation},
        mechanics=modes)


def scenario_for_cubic(*, d, p, kappa_hz=1e6, kex_fraction=0.5, om_ratio=5.0,
                       gamma_ratio=1e-5, g0_hz=100.0, detuning_reference="bare"):
    """Scenario whose self-consistency cubic in x = s n̄/(κ/2) reads
    x³ + 2d x² + (1 + d²) x = p, i.e. bare detuning Δ0 = d κ/2 and a drive
    strength p = s κ_ex Φ/(κ/2)³."""
    om_hz = om_ratio * kappa_hz
    gm_hz = gamma_ratio * om_hz
    k, om, gm, g0 = (2 * np.pi * x for x in (kappa_hz, om_hz, gm_hz, g0_hz))
    s = 2 * g0**2 * om / (om**2 + gm**2 / 4)
    flux = p * (k / 2) ** 3 / (s * k * kex_fraction)
    f_drive = 2.8e14
    power = flux * scipy.constants.h * f_drive
    return make_scenario(
        drive={"wavelength_m": None, "frequency_hz": f_drive, "power_w": power,
               "detuning_hz": d * kappa_hz / 2, "detuning_reference": detuning_reference},
        cavity={"linewidth_hz": kappa_hz, "external_linewidth_hz": kappa_hz * kex_fraction},
        mechanics=[mode(frequency_hz=om_hz, linewidth_hz=gm_hz, coupling_hz=g0_hz)])


def bistable_window(d):
    """Range of p with three solutions, from the cubic's local extrema (d < −√3)."""
    g = np.poly1d([1, 2 * d, 1 + d * d, 0])
    xs = sorted(np.roots(g.deriv()).real)
    return g(xs[1]), g(xs[0])


def mode(name="m0", *, frequency_hz=20e6, linewidth_hz=10.0, coupling_hz=100.0,
         bath_occupation=100.0, bath_temperature_k=None, effective_mass_kg=1e-15):
    """One ``[[mechanics]]`` table as plain data (give a temperature or an occupation)."""
    if bath_temperature_k is not None:
        bath_occupation = None
    return _drop_none({"name": name, "frequency_hz": frequency_hz,
                       "linewidth_hz": linewidth_hz, "effective_mass_kg": effective_mass_kg,
                       "coupling_hz": coupling_hz, "bath_occupation": bath_occupation,
                       "bath_temperature_k": bath_temperature_k})


SWEEP_BASE = (REPO / "tests" / "data" / "sweep_base.toml").read_text()
CLI_ENV = dict(os.environ, PYTHONPATH=str(REPO))  # a subprocess imports this checkout


def detuning_sweep(points):
    """:data:`SWEEP_BASE` with a detuning sweep of ``points`` values, as TOML text."""
    axis = (f'{{ start = -1.9, stop = -0.1, num = {points}, '
            'unit = "mechanics[0].frequency_hz" }')
    return SWEEP_BASE + f'\n[sweep]\n[sweep.parameters]\n"drive.detuning_hz" = {axis}\n'


def run_cli(*args, cwd=None):
    """Run ``python -m simulator ARGS`` in a fresh interpreter; CompletedProcess."""
    return subprocess.run([sys.executable, "-m", "simulator", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd or REPO, env=CLI_ENV,
                          timeout=120)


def _drop_none(data):
    if isinstance(data, dict):
        return {k: _drop_none(v) for k, v in data.items() if v is not None}
    if isinstance(data, list):
        return [_drop_none(v) for v in data]
    return data


@pytest.fixture(scope="session")
def scenario_factory():
    """:func:`make_scenario` as a fixture (session scope: usable under hypothesis)."""
    return make_scenario


@pytest.fixture(scope="session")
def coupled_scenario():
    """:func:`scenario_with_coupling` as a fixture."""
    return scenario_with_coupling
