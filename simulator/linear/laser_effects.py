"""What classical laser noise does to the occupation and to the sidebands.

The linear-stage view of the drive's noise (:mod:`simulator.model.laser_noise`
builds its states into the model): the input occupation it adds at each mode,
the occupation in excess of the same scenario with a shot-noise-limited drive,
and the apparent (sideband-ratio) occupation that its interference with the
motion biases. References: Safavi-Naeini et al., New J. Phys. 15, 035007
(2013); Jayich et al., New J. Phys. 14, 115018 (2012).
"""

from simulator.linear.sidebands import sideband_summary
from simulator.linear.steady_state import steady_state
from simulator.model.laser_spectra import tone_input_occupation
from simulator.scenario.loader import scenario_from_dict


def without_laser_noise(scenario):
    """The same scenario with shot-noise-limited tones and LO, and no calibration tone."""
    data = scenario.to_dict()
    for key in ("phase_noise", "intensity_noise", "calibration_tone"):
        data["drive"].pop(key, None)
    data.get("detection", {}).pop("local_oscillator_phase_noise", None)
    for tone in data.get("tones", ()):
        for key in ("phase_noise", "intensity_noise", "noise_source"):
            tone.pop(key, None)
    return scenario_from_dict(data, source=scenario.source)


def occupation_report(system, steady):
    """Per mode: laser input occupation, excess occupation and the apparent one.

    Parameters
    ----------
    system : simulator.model.system.System
    steady : simulator.linear.steady_state.SteadyState
        Its steady state.

    Returns
    -------
    tuple of dict
        ``laser_input_occupation`` (η_c n_c at the mode frequency, of the
        detected tone, see :func:`simulator.model.laser_spectra.input_occupation`),
        ``laser_noise_excess_occupation`` (exact occupation minus that of the
        same scenario without laser noise) and,
        for heterodyne detection, ``apparent_occupation_from_asymmetry`` (the
        sideband-ratio occupation of :func:`simulator.linear.sidebands.sideband_summary`,
        which laser noise biases: the classical noise the detector sees
        interferes with the motion it drives, as the vacuum does).
    """
    scenario, point = system.scenario, system.detected.point
    quiet = steady_state(without_laser_noise(scenario))
    share = point.external_linewidth_hz / point.cavity_linewidth_hz
    summaries = (sideband_summary(system) if scenario.detection.scheme == "heterodyne"
                 else None)
    out = []
    for j, mode in enumerate(steady.modes):
        entry = {"laser_input_occupation": share * float(tone_input_occupation(
                     scenario, scenario.detection.tone, point.input_photon_flux,
                     point.modes[j].frequency_hz)),
                 "laser_noise_excess_occupation": mode.occupation - quiet.modes[j].occupation}
        if summaries is not None:
            entry["apparent_occupation_from_asymmetry"] = summaries[j].occupation_from_ratio
            if summaries[j].warning:
                entry["apparent_occupation_warning"] = summaries[j].warning
        out.append(entry)
    return tuple(out)
