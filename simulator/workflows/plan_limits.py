"""What the planner asks of a point besides its objective: absorption heating and bistability.

:func:`heated` raises every mode's bath temperature by the ``[plan]``
section's heating model (absorption heating, not the optics, is what limits
the drive power in practice: common practice); :func:`near_bistable` checks
whether the photon number is multivalued within a margin of the point, from
the closed-form bistable window of the cavity's cubic.
"""


def heated(scenario, plan):
    """The scenario with every bath temperature raised by the heating model."""
    if plan.heating_per_photon_k == 0 and plan.heating_k_per_w == 0:
        return scenario
    from simulator.model.operating_point import operating_point
    from simulator.model.units import photon_energy_j

    point = operating_point(scenario)
    circulating_w = (point.photon_number * photon_energy_j(point.drive_frequency_hz)
                     * (plan.free_spectral_range_hz or 0.0))
    rise = plan.heating_per_photon_k * point.photon_number + (plan.heating_k_per_w
                                                              * circulating_w)
    for i, mode in enumerate(scenario.mechanics):
        scenario = scenario.replace(f"mechanics[{i}].bath_temperature_k",
                                    mode.bath_temperature_k + rise)
    return scenario


# samples of the detuning across the margin (the bistable window is smooth in d)
BISTABILITY_SAMPLES = 129


def near_bistable(scenario, point, margin):
    """True when the photon number is multivalued here or within ``margin`` of here.

    Within the margin: drive power × (1 ± margin) and detuning ± margin·max(|Δ|, κ/2)
    (κ/2 sets the scale on resonance). The bistable region in the plane of the
    cubic's detuning d and drive strength P is known in closed form
    (:func:`simulator.model.operating_point.bistable_drive_window`), so the
    whole rectangle is checked, not a few of its points.
    """
    import numpy as np

    from simulator.model.operating_point import bistable_drive_window, drive_strength

    if point.bistable:
        return True
    if scenario.drive.detuning_reference != "bare" or scenario.drive.power_w == 0:
        return False  # a detuning from the effective resonance has one solution
    d, p = drive_strength(scenario)
    step = margin * max(abs(d), 1.0)
    detunings = np.linspace(d - step, d + step, BISTABILITY_SAMPLES)
    low, high = bistable_drive_window(np.append(detunings, -np.sqrt(3.0) - 1e-12
                                                if abs(d + np.sqrt(3.0)) <= step else d))
    with np.errstate(invalid="ignore"):
        return bool(np.any((low <= p * (1 + margin)) & (high >= p * (1 - margin))))
