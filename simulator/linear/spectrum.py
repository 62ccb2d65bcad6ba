"""The spectrum result type shared by every engine (linear, master equation, records).

A :class:`Spectrum` states everything a reader needs to use its numbers: which
frequency axis (optical offset from the drive, or baseband), whether it is
two-sided or one-sided, that it is a density, its units, the total and the
named contributions of a noise budget, and its provenance.
"""

import dataclasses

import numpy as np


@dataclasses.dataclass(frozen=True, kw_only=True)
class SpectralLine:
    """A coherent line (a calibration tone): a power at one frequency, not a density.

    ``power`` is in the spectrum's density units × Hz: the line compares with
    a density S over a band B as S·B, and an estimator with equivalent noise
    bandwidth ENBW shows it at height power/ENBW above the density. A line
    has no width, so it is kept out of the density curves.
    """

    name: str
    frequency_hz: float
    power: float


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class Spectrum:
    """A spectral density on a frequency grid, with its meaning spelled out.

    Parameters
    ----------
    frequency_hz : ndarray
        The grid (Hz, ordinary frequency).
    axis : str
        What the frequency means, e.g. ``"optical offset from the drive (> 0:
        anti-Stokes)"`` or ``"baseband frequency f >= 0"``.
    sided : str
        ``"two-sided"`` or ``"one-sided"``.
    units : str
        Units of the density, e.g. ``"shot-noise units (vacuum = 1)"``,
        ``"m^2/Hz"``.
    total : ndarray
        The spectral density on the grid.
    contributions : dict of str to ndarray
        Named parts of a noise budget; they sum to ``total`` where given.
    quantity : str
        What is measured, e.g. ``"heterodyne output"``.
    reference : dict of str to ndarray
        Reference curves on the same grid (standard quantum limit, zero-point
        spectrum, ...), not part of the budget.
    calibration : dict of str to float
        Factors used to convert from the model's native units, with units in
        the key name.
    provenance : dict
        Scenario name, engine, software version and options.
    lines : tuple of SpectralLine
        Coherent lines (powers, not densities) on the same axis, e.g. the
        calibration tone; empty for a pure noise spectrum.
    """

    frequency_hz: np.ndarray
    axis: str
    sided: str
    units: str
    total: np.ndarray
    quantity: str = ""
    contributions: dict = dataclasses.field(default_factory=dict)
    reference: dict = dataclasses.field(default_factory=dict)
    calibration: dict = dataclasses.field(default_factory=dict)
    provenance: dict = dataclasses.field(default_factory=dict)
    density: bool = True
    lines: tuple = ()

    def __post_init__(self):
        if self.sided not in ("two-sided", "one-sided"):
            raise ValueError(f"Spectrum.sided is {self.sided!r}; expected 'two-sided' "
                             "or 'one-sided'")
        if not all(isinstance(line, SpectralLine) for line in self.lines):
            raise ValueError("Spectrum.lines holds something other than SpectralLine")
        f = np.asarray(self.frequency_hz, dtype=float)
        for name, arr in [("total", self.total), *self.contributions.items(),
                          *self.reference.items()]:
            if np.shape(arr) != f.shape:
                raise ValueError(f"Spectrum curve {name!r} has shape {np.shape(arr)}; "
                                 f"expected {f.shape} like frequency_hz")

    def budget_residual(self):
        """Largest |total − Σ contributions| relative to max |total| (0 if no budget)."""
        if not self.contributions:
            return 0.0
        parts = sum(np.asarray(c) for c in self.contributions.values())
        return float(np.max(np.abs(self.total - parts)) / np.max(np.abs(self.total)))

    def save(self, path, *, overwrite=False):
        """Write the spectrum to ``path``: NetCDF (``.nc``) or CSV (``.csv``), atomically.

        A thin hand-off to :func:`simulator.io.spectrumfile.save_spectrum`,
        which holds the formats; see there.
        """
        from simulator.io.spectrumfile import save_spectrum

        return save_spectrum(self, path, overwrite=overwrite)
