"""Invented scenarios with several drive tones, shared by the tests of several tones.

A microwave-like device: one mechanical mode at 5 MHz, cavity modes of 200 kHz
linewidth (sideband resolved, Ωm/κ = 25). Tones are given by their intracavity
photon number; the power follows from n = κex Φ / (κ²/4 + Δ²) at the effective
detuning.
"""

from simulator.model.units import angular, photon_energy_j
from simulator.scenario.loader import parse_scenario

CARRIER_HZ = 6e9
KAPPA_HZ = 200e3
OMEGA_HZ = 5e6
G0_HZ = 50.0


def power_w(photons, detuning_hz, kappa_hz=KAPPA_HZ, frequency_hz=CARRIER_HZ):
    """Input power that puts ``photons`` in a critically coupled mode at ``detuning_hz``."""
    k, ke, d = angular([kappa_hz, kappa_hz / 2, detuning_hz])
    return float(photons * (k**2 / 4 + d**2) / ke * photon_energy_j(frequency_hz))


def scenario_text(*, drive_photons=1.6e5, drive_detuning_hz=-OMEGA_HZ, extra="",
                  reference="effective", linewidth_hz=50.0, bath_occupation=100.0,
                  kappa_hz=KAPPA_HZ):
    """TOML of the device with its drive; ``extra`` appends further tables."""
    return f"""
[scenario]
name = "two-tone test device"
[drive]
frequency_hz = {CARRIER_HZ!r}
power_w = {power_w(drive_photons, drive_detuning_hz, kappa_hz)!r}
detuning_hz = {drive_detuning_hz!r}
detuning_reference = "{reference}"
[cavity]
linewidth_hz = {kappa_hz!r}
external_linewidth_hz = {kappa_hz / 2!r}
[[mechanics]]
name = "drum"
frequency_hz = {OMEGA_HZ!r}
linewidth_hz = {linewidth_hz!r}
effective_mass_kg = 1e-12
coupling_hz = {G0_HZ!r}
bath_occupation = {bath_occupation!r}
""" + extra


def tone_table(name, photons, detuning_hz, cavity_mode="cavity", *, kappa_hz=KAPPA_HZ,
               frequency_hz=CARRIER_HZ):
    """A [[tones]] table holding ``photons`` at ``detuning_hz`` (photon energy at
    ``frequency_hz``) in a mode of linewidth ``kappa_hz``."""
    return f"""
[[tones]]
name = "{name}"
cavity_mode = "{cavity_mode}"
power_w = {power_w(photons, detuning_hz, kappa_hz, frequency_hz)!r}
detuning_hz = {detuning_hz!r}
"""


def second_mode(name="idler", g0_hz=30.0, frequency_hz=7e9, bath_occupation=0.0):
    """A second cavity mode like the first, coupled to the drum with ``g0_hz``."""
    return f"""
[[cavity_modes]]
name = "{name}"
frequency_hz = {frequency_hz!r}
linewidth_hz = {KAPPA_HZ!r}
external_linewidth_hz = {KAPPA_HZ / 2!r}
bath_occupation = {bath_occupation!r}
[[couplings]]
cavity_mode = "{name}"
mechanics = "drum"
coupling_hz = {g0_hz!r}
"""


def probe_scenario(offset_hz, probe_photons=1e4):
    """Red cooling tone at −Ωm and a weak blue probe at +Ωm + offset on the same mode."""
    return parse_scenario(scenario_text(extra=tone_table("probe", probe_photons,
                                                         OMEGA_HZ + offset_hz)))


def mechanical_occupation(v, start=2):
    """(⟨q²⟩ + ⟨p²⟩ − 1)/2 of the pair at ``start``."""
    return float((v[start, start] + v[start + 1, start + 1] - 1) / 2)


def anomalous_moment(v, start=2):
    """|⟨b²⟩| = |⟨q²⟩ − ⟨p²⟩ + 2i⟨qp⟩_sym| / 2: squeezing the per-tone model cannot hold."""
    return float(abs(v[start, start] - v[start + 1, start + 1]
                     + 2j * v[start, start + 1]) / 2)

