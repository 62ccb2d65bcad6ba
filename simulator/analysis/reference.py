"""Reference estimators, in the form the validation harness calls.

``noisechain trial SCENARIO --estimator simulator.analysis.reference:sideband_thermometry``
runs the careful-lab analysis of :mod:`simulator.analysis.thermometry` on each
record (with ``--averaged N``, on each averaged spectrum). Every estimator here
uses only the public record and the scenario's nominal calibration, never the
truth.
"""

import numpy as np

from simulator.analysis.psd import WindowedExpectation, averaged_periodogram
from simulator.analysis.thermometry import Calibration, measure_occupation
from simulator.errors import InputError

# Bins per expected linewidth. The model carries the periodogram's kernel, so
# a few bins resolve the line without broadening it; the fit's cost grows with
# the square of the bins in its band (the kernel sums), its information hardly
# at all beyond this (our choice, checked by tests/test_reference_microwave.py).
BINS_PER_LINEWIDTH = 4


def record_psd(record, resolution_hz):
    """Bartlett periodogram (boxcar window) of a public IQ record, in its own units.

    Raises
    ------
    simulator.errors.InputError
        Not an IQ record, or samples that are not all finite (a periodogram
        would spread one NaN over every bin and every estimate).
    """
    if record.kind != "iq":
        raise InputError(f"record kind {record.kind!r}: the sideband thermometry needs an "
                         "IQ (complex heterodyne) record")
    finite = np.isfinite(record.samples)
    if not finite.all():
        raise InputError(f"the record holds {int(finite.size - finite.sum())} non-finite "
                         f"samples (NaN or infinity; the first at index "
                         f"{int(np.argmin(finite))} of {finite.size}); the sideband "
                         "thermometry needs finite samples")
    fs = record.sample_rate_hz
    segment = int(2 ** np.ceil(np.log2(fs / resolution_hz)))
    return averaged_periodogram(record.samples, fs, segment_samples=segment, window="boxcar")


def sideband_thermometry(record, mode=0, *, fano=False):
    """Occupation from the sideband asymmetry, the calibrated areas and the damping.

    Returns ``{name: (value, uncertainty)}`` with names the harness compares
    with the truth: ``occupation:asymmetry``, ``occupation:anti_stokes_area``,
    ``occupation:stokes_area``, ``occupation:damping``,
    ``effective_frequency_hz`` and ``effective_linewidth_hz``; an estimate
    the record does not resolve (a sideband the cavity filters into the
    floor) is left out. With ``fano``
    the lines are fitted with their dispersive partners on a shaped floor
    (see :func:`fano_sideband_thermometry`).
    """
    cal = Calibration.from_scenario(record.scenario, mode)
    k, g = cal.cavity_linewidth_hz, cal.coupling_rate_hz
    a_minus = g**2 * k / (k**2 / 4 + (cal.detuning_hz + cal.mechanical_frequency_hz) ** 2)
    width = cal.mechanical_linewidth_hz + a_minus - cal.stokes_rate_hz()
    if hasattr(record, "estimate"):  # an averaged spectrum (`trial --averaged N`): its bins
        if record.kind != "iq":
            raise InputError(f"record kind {record.kind!r}: the sideband thermometry needs "
                             "an IQ (complex heterodyne) spectrum")
        psd = record.estimate
    else:
        psd = record_psd(record, resolution_hz=abs(width) / BINS_PER_LINEWIDTH)
    # the periodogram's own kernel (boxcar: Fejér) convolves the model lines
    smear = WindowedExpectation(record.sample_rate_hz, psd.frequency_hz.size, psd.window)
    # integrate-and-dump samples: the model carries the sinc², the data stay as they are
    result = measure_occupation(psd, cal, sample_rate_hz=record.sample_rate_hz, fano=fano,
                                smear=smear)
    out = {f"occupation:{key}": value for key, value in (
        ("asymmetry", (result.occupation_asymmetry, result.occupation_asymmetry_error)),
        ("anti_stokes_area", (result.occupation_anti_stokes_area,
                              result.occupation_anti_stokes_area_error)),
        ("stokes_area", (result.occupation_stokes_area, result.occupation_stokes_area_error)),
        ("damping", (result.occupation_damping, result.occupation_damping_error)))}
    fit = result.fit.as_dict()
    out["effective_frequency_hz"] = fit["frequency_hz"]
    out["effective_linewidth_hz"] = fit["linewidth_hz"]
    # what the record does not resolve is left out, not returned as NaN: the
    # harness counts it as a failure of that quantity, and keeps the trial
    return {name: pair for name, pair in out.items() if np.all(np.isfinite(pair))}


def fano_sideband_thermometry(record, mode=0):
    """:func:`sideband_thermometry` with Fano-shaped lines on a shaped floor.

    For drives with classical noise the detector also sees: the fit then
    returns the Lorentzian weights without bias, and those are shifted by the
    noise (docs/laser-noise.md), so the asymmetry estimates the apparent
    occupation of :func:`simulator.linear.sidebands.sideband_summary`, not the true
    one; the harness shows the difference as a bias.
    """
    return sideband_thermometry(record, mode, fano=True)
