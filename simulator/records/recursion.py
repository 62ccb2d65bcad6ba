"""The real linear recursion a record runs, written out as matrices for checking.

:class:`Recursion` holds F, G, H, J and the start covariance of the kernel
that :func:`simulator.records.kernels.stepper` binds (full state, dense or
modal innovations), and computes from them alone the output
autocovariance and how far the start is from stationary: the checks that
the numba kernels run the model they were derived from.
"""

import dataclasses

import numpy as np


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class Recursion:
    """The real linear recursion a record runs, written out for checking.

    z_{n+1} = F z_n + G ξ_n, y_n = H z_n + J ξ_n with ξ_n independent standard
    normals and z_0 drawn with covariance ``start_covariance``. For the modal
    kernel z holds the real and imaginary parts of the modal coordinates
    (z = (Re m, Im m)), so the matrices here are the ones the kernel
    multiplies, not the model it was derived from.

    Attributes
    ----------
    kind : str
        ``"full-state"``, ``"innovations"`` (dense) or ``"modal innovations"``.
    transition, drive, output, feedthrough : ndarray
        F, G, H, J.
    start_covariance : ndarray
        Covariance of z_0.
    """

    kind: str
    transition: np.ndarray
    drive: np.ndarray
    output: np.ndarray
    feedthrough: np.ndarray
    start_covariance: np.ndarray

    def autocovariance(self, lags):
        """E[y_{n+τ} y_nᵀ] for τ = 0 … lags − 1 from the matrices, assuming z_0 stationary.

        R(0) = H P Hᵀ + J Jᵀ and R(τ) = H F^{τ−1} (F P Hᵀ + G Jᵀ), P the start
        covariance; :meth:`output_stationarity_error` says whether the outputs
        are stationary from the first sample.
        """
        f, g, h, j, p = (self.transition, self.drive, self.output, self.feedthrough,
                         self.start_covariance)
        out = np.empty((int(lags), h.shape[0], h.shape[0]))
        out[0] = h @ p @ h.T + j @ j.T
        m = f @ p @ h.T + g @ j.T
        for tau in range(1, int(lags)):
            out[tau] = h @ m
            m = f @ m
        return out

    def state_drift(self):
        """Δ = F P Fᵀ + G Gᵀ − P: the change of the state covariance over one sample."""
        f, g, p = self.transition, self.drive, self.start_covariance
        return f @ p @ f.T + g @ g.T - p

    def state_stationarity_error(self):
        """Largest entry of Δ over the largest entry of P: zero for a stationary state."""
        return float(np.abs(self.state_drift()).max() / np.abs(self.start_covariance).max())

    def output_stationarity_error(self, lags):
        """How far E[y_{1+τ} y_1ᵀ] is from E[y_τ y_0ᵀ], τ < ``lags``, relative to R(0).

        The difference is H F^τ Δ Hᵀ. Only the outputs need to be stationary
        from the first sample: a state combination that never reaches them (a
        dark combination of two degenerate modes) may start anywhere.
        """
        h, f = self.output, self.transition
        scale = np.abs(self.autocovariance(1)[0]).max()
        m, worst = self.state_drift() @ h.T, 0.0
        for _ in range(int(lags)):
            worst = max(worst, float(np.abs(h @ m).max()))
            m = f @ m
        return worst / scale
