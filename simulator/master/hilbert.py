"""Truncated Fock-space models of a scenario: full nonlinear and linearised.

Frame rotating at the drive, ħ = 1. The cavity is the first factor of the
tensor product, then one factor per mechanical mode in scenario order.

Full model (bare detuning Δ0, single-photon couplings g0_j)::

    H = −Δ0 a†a + Σ_j [Ωj b_j†b_j − g0_j a†a (b_j + b_j†)] + i√(κ_ex Φ) (a† − a)

with Φ = P/(ħω_L) the drive photon flux at the external port. The drive term
is the input-output coupling √κ_ex a_in with a real input amplitude
⟨a_in⟩ = +√Φ (phase choice: the drive defines phase zero), so
da/dt = (iΔ0 − κ/2) a + i Σ g0_j a (b_j + b_j†) + √(κ_ex Φ) + noise.

The same full model in the displaced frame (a → ᾱ + a, b_j → β̄_j + b_j with
the mean fields of the operating point, and the phase of a turned so that ᾱ
is real) is exactly the linearised Hamiltonian below plus the term the
linearisation drops, −Σ_j g0_j a†a (b_j + b_j†): the drive and every linear
term cancel against the mean-field equations, and Δ0 + g0 (β̄ + β̄*) = Δ. Its
Fock basis is centred on the mean field, so the cutoffs follow the
fluctuations, not n̄; ``frame="lab"`` keeps the undisplaced basis, which does
not use the operating point at all and so checks it independently.

Linearised model (effective detuning Δ, g_j = g0_j √n̄), acting on the
fluctuations around the operating point, with the intracavity mean taken real
as in :mod:`simulator.model.optomechanics`::

    H_lin = −Δ a†a + Σ_j [Ωj b_j†b_j − g_j (a + a†)(b_j + b_j†)]

Collapse operators, the same in both models (Lindblad form):
√κ_ex a (external port, vacuum), √(κ_in (n_c + 1)) a and √(κ_in n_c) a†
(internal loss, bath occupation n_c = ``cavity.bath_occupation``),
√(Γj (n_j + 1)) b_j and √(Γj n_j) b_j† (symmetric, rotating-wave mechanical
damping as in the linear engine). With these the linearised master equation
has exactly the Lyapunov steady state of :mod:`simulator.linear.steady_state`, up to
truncation.

Every operator is stored in units of a reference rate r = κ (rad/s) so that
the numbers the solvers see are of order one.

References
----------
Aspelmeyer, Kippenberg, Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Secs. II.B,
III and V (optomechanical Hamiltonian, linearisation, input-output).
Gardiner and Zoller, Quantum Noise, 3rd ed. (Springer, 2004), Ch. 5 (Lindblad
damping by thermal baths).
"""

import dataclasses
import math

import numpy as np

from simulator.errors import InputError
from simulator.model.system import as_system
from simulator.model.units import angular

KINDS = ("full", "linearised")
FRAMES = ("auto", "lab", "displaced")
TAIL_LEVELS = 2  # the "population near the cutoff" is the weight of the top levels
DEFAULT_TOLERANCE = 1e-4  # allowed population in the top TAIL_LEVELS of each mode
MIN_CUTOFF = 3
MAX_DIMENSION = 400  # Hilbert-space size where the default solvers stay practical


@dataclasses.dataclass(frozen=True, eq=False, kw_only=True)
class MasterModel:
    """A scenario as a Hamiltonian and collapse operators in a truncated Fock space.

    Attributes
    ----------
    kind : str
        ``"full"`` or ``"linearised"``.
    frame : str
        ``"lab"`` (undisplaced Fock basis) or ``"displaced"`` (fluctuations
        around the operating point's mean fields; always so for linearised).
    names : tuple of str
        ``("cavity", <mode names>...)``, one per tensor factor.
    cutoffs : tuple of int
        Fock-space dimension of each factor.
    hamiltonian : qutip.Qobj
        H in units of ``rate_unit_rad_s``.
    collapse : tuple of qutip.Qobj
        Collapse operators, square roots of rates in units of ``rate_unit_rad_s``.
    annihilators : tuple of qutip.Qobj
        a, b_1, b_2, ... on the full space.
    rate_unit_rad_s : float
        r (rad/s): every rate above is a multiple of it.
    external_rate : float
        κ_ex / r.
    input_amplitude : float
        ⟨a_in⟩ = √Φ (√(photons/s)).
    mean_fields : tuple of complex
        Displacement of each factor that the displaced frame removes, in that
        frame's phase (cavity |ᾱ|, mode j β̄_j = i g0_j n̄/(iΩj + Γj/2)); zeros
        in the lab frame and for the linearised model (which describes the
        fluctuations only).
    cavity_phase : float
        arg ᾱ (rad): the displaced frame's cavity operator is e^{−i arg ᾱ}
        times the lab one.
    expected_occupations : tuple of float
        Mean quanta per factor the cutoffs were chosen for (coherent part
        included for the full model).
    system : simulator.model.system.System
        The linear engine's system the model was built from.
    """

    kind: str
    frame: str
    names: tuple
    cutoffs: tuple
    hamiltonian: object
    collapse: tuple
    annihilators: tuple
    rate_unit_rad_s: float
    external_rate: float
    input_amplitude: float
    mean_fields: tuple
    cavity_phase: float
    expected_occupations: tuple
    system: object

    @property
    def point(self):
        """The operating point (of :attr:`system`)."""
        return self.system.point

    @property
    def dimension(self):
        """Size of the truncated Hilbert space (product of the cutoffs)."""
        return math.prod(self.cutoffs)


def build_model(system, kind="full", *, frame="auto", cutoffs=None,
                tolerance=DEFAULT_TOLERANCE, max_dimension=MAX_DIMENSION):
    """The full or linearised master-equation model of ``system``.

    Parameters
    ----------
    system : simulator.model.system.System
        Or a scenario, built into one.
    kind : {"full", "linearised"}
    frame : {"auto", "lab", "displaced"}
        Fock basis of the full model (see the module doc); ``"auto"`` takes
        the lab frame below one intracavity photon (where the mean field says
        little and the lab basis is small) if it fits in ``max_dimension``,
        else the displaced frame. Fluctuation quantities come out more
        accurately in the displaced frame: in the lab frame they are small
        differences such as ⟨a†a⟩ − |⟨a⟩|².
    cutoffs : sequence of int or dict, optional
        Fock dimensions, cavity first, or a mapping from ``"cavity"`` and mode
        names to dimensions (others chosen automatically). Default: chosen by
        :func:`expected_cutoffs` so that the expected population in the top
        :data:`TAIL_LEVELS` levels of every factor is below ``tolerance``/4.
    tolerance : float
        Population allowed near each cutoff (used only to choose cutoffs).
    max_dimension : int
        Used only by ``frame="auto"``.

    Returns
    -------
    MasterModel
    """
    import qutip

    if kind not in KINDS:
        raise InputError(f"master-equation model {kind!r}; expected one of {', '.join(KINDS)}")
    from simulator.model import laser_noise

    system = as_system(system, stage="simulator.master.hilbert.build_model")
    scenario, point = system.scenario, system.point
    if not laser_noise.is_quiet(scenario):
        raise InputError(
            "the master-equation engine models a shot-noise-limited drive and local "
            "oscillator only; this scenario has classical laser noise or a calibration tone "
            "([drive.phase_noise], [drive.intensity_noise], [drive.calibration_tone] or "
            "[detection.local_oscillator_phase_noise]). Remove them to compare engines, "
            "or use the linear engine, which models them")
    if frame not in FRAMES:
        raise InputError(f"master-equation frame {frame!r}; expected one of "
                         f"{', '.join(FRAMES)}")
    if kind == "linearised":
        frame = "displaced"
    elif frame == "auto":
        lab = expected_cutoffs(system, "full", tolerance=tolerance)[1]
        small = point.photon_number < 1 and math.prod(lab) <= max_dimension
        frame = "lab" if small else "displaced"
    displaced = frame == "displaced"
    expected, guess = expected_cutoffs(system, kind if not displaced else "linearised",
                                       tolerance=tolerance)
    dims = _merge_cutoffs(cutoffs, guess, ("cavity",) + tuple(m.name for m in point.modes))
    r = float(angular(point.cavity_linewidth_hz))
    kappa, kappa_ex = angular([point.cavity_linewidth_hz, point.external_linewidth_hz]) / r
    kappa_in = max(kappa - kappa_ex, 0.0)
    ops = [qutip.destroy(n) for n in dims]
    eye = [qutip.qeye(n) for n in dims]

    def on(k):
        return qutip.tensor(*[ops[i] if i == k else eye[i] for i in range(len(dims))])

    a = on(0)
    n_cav = a.dag() * a
    n_c = point.cavity_bath_occupation
    collapse = [np.sqrt(kappa_ex) * a]
    if kappa_in > 0:
        collapse.append(np.sqrt(kappa_in * (n_c + 1)) * a)
        if n_c > 0:
            collapse.append(np.sqrt(kappa_in * n_c) * a.dag())
    amplitude = float(np.sqrt(point.input_photon_flux))
    if displaced:
        delta = float(angular(point.detuning_effective_hz)) / r
        H = -delta * n_cav
        # ᾱ = √(κ_ex Φ)/(κ/2 − iΔ), in physical units of √photons
        alpha = (np.sqrt(kappa_ex * point.input_photon_flux / r)
                 / complex(kappa / 2, -delta)) if point.input_photon_flux else 0j
    else:
        detuning = float(angular(point.detuning_bare_hz)) / r
        drive = np.sqrt(kappa_ex * point.input_photon_flux / r)
        H = -detuning * n_cav + 1j * drive * (a.dag() - a)
        alpha = 0j
    full_displaced = kind == "full" and displaced
    phase = float(np.angle(alpha)) if full_displaced else 0.0
    mean_fields = [abs(alpha) if full_displaced else 0j]
    annihilators = [a]
    for j, mode in enumerate(point.modes):
        b = on(j + 1)
        om, gm = angular([mode.frequency_hz, mode.linewidth_hz]) / r
        H += om * b.dag() * b
        if displaced:
            H -= float(angular(mode.coupling_rate_hz)) / r * (a + a.dag()) * (b + b.dag())
        if kind == "full":
            H -= float(angular(mode.single_photon_coupling_hz)) / r * n_cav * (b + b.dag())
        mean_fields.append(1j * abs(alpha) ** 2 * float(angular(mode.single_photon_coupling_hz))
                           / r / complex(gm / 2, om) if full_displaced else 0j)
        collapse.append(np.sqrt(gm * (mode.bath_occupation + 1)) * b)
        if mode.bath_occupation > 0:
            collapse.append(np.sqrt(gm * mode.bath_occupation) * b.dag())
        annihilators.append(b)
    names = ("cavity",) + tuple(m.name for m in point.modes)
    return MasterModel(kind=kind, frame=frame, names=names,
                       cutoffs=tuple(dims), hamiltonian=H, collapse=tuple(collapse),
                       annihilators=tuple(annihilators), rate_unit_rad_s=r,
                       external_rate=float(kappa_ex), input_amplitude=amplitude,
                       mean_fields=tuple(mean_fields), cavity_phase=phase,
                       expected_occupations=tuple(expected), system=system)


def full_model(system, **options):
    """:func:`build_model` with ``kind="full"``: the nonlinear Hamiltonian."""
    return build_model(system, "full", **options)


def linearised_model(system, **options):
    """:func:`build_model` with ``kind="linearised"``: the displaced-frame model."""
    return build_model(system, "linearised", **options)


def expected_cutoffs(system, kind, *, tolerance=DEFAULT_TOLERANCE):
    """Expected quanta and a Fock cutoff for every factor, from the linear engine.

    The fluctuations are taken thermal with the linear engine's (Lyapunov)
    occupations; in the full model the cavity is further displaced by the
    mean field (|α|² = n̄) and each mode by its static displacement
    |β_j| = g0_j n̄ / |Ωj − iΓj/2|. The cutoff is the smallest dimension whose
    top :data:`TAIL_LEVELS` levels would hold less than ``tolerance``/4 of a
    displaced thermal state with these parameters.

    Returns
    -------
    expected : list of float
        Mean quanta |displacement|² + thermal occupation, cavity first.
    cutoffs : list of int
    """
    from simulator.linear.steady_state import steady_state

    system = as_system(system, stage="simulator.master.hilbert.expected_cutoffs")
    point = system.point
    linear = steady_state(system)
    thermal = [linear.cavity_occupation] + [m.occupation for m in linear.modes]
    if kind == "full":
        n = point.photon_number
        shifts = [abs(complex(m.frequency_hz, -m.linewidth_hz / 2)) for m in point.modes]
        displaced = [n] + [(m.single_photon_coupling_hz * n / s) ** 2
                           for m, s in zip(point.modes, shifts, strict=True)]
    else:
        displaced = [0.0] * len(thermal)
    expected = [d + max(t, 0.0) for d, t in zip(displaced, thermal, strict=True)]
    cutoffs = [displaced_thermal_cutoff(d, max(t, 0.0), tolerance / 4)
               for d, t in zip(displaced, thermal, strict=True)]
    return expected, cutoffs


def displaced_thermal_cutoff(displacement, occupation, tail):
    """Smallest dimension N whose top :data:`TAIL_LEVELS` levels hold at most ``tail``.

    For the Fock distribution of D(β) ρ_th(n) D(β)†, |β|² = ``displacement``,
    n = ``occupation``: p(m) = Σ_k n^k/(n+1)^(k+1) |⟨m|D(β)|k⟩|², evaluated in
    an enlarged space. Beyond a few hundred levels a Gaussian estimate is
    returned instead (such a model does not fit in memory anyway).
    """
    n, s = float(occupation), float(displacement)
    if n > 0:
        thermal = math.ceil(math.log(tail) / math.log(n / (n + 1)))
    else:
        thermal = 0
    spread = math.sqrt(s * (2 * n + 1) + n * (n + 1))
    rough = int(math.ceil(s + 8 * spread)) + thermal + TAIL_LEVELS
    if s == 0 or rough > 300:
        return max(MIN_CUTOFF, rough if s else thermal + TAIL_LEVELS)
    import scipy.linalg

    size = 2 * rough + 20
    lowering = np.diag(np.sqrt(np.arange(1, size)), 1)
    beta = math.sqrt(s)
    d = scipy.linalg.expm(beta * (lowering.T - lowering))
    k = np.arange(size)
    p_th = (n / (n + 1)) ** k / (n + 1) if n > 0 else (k == 0).astype(float)
    p = (np.abs(d) ** 2 @ p_th)[: size - 10]
    above = np.cumsum(p[::-1])[::-1]  # above[m] = Σ_{j ≥ m} p(j)
    ok = np.flatnonzero(above <= tail)
    first = int(ok[0]) if ok.size else rough
    return max(MIN_CUTOFF, first + TAIL_LEVELS)


def _merge_cutoffs(given, guess, names):
    if given is None:
        return list(guess)
    if isinstance(given, dict):
        unknown = set(given) - set(names)
        if unknown:
            raise InputError(f"cutoffs name {sorted(unknown)!r}; expected keys among "
                             f"{', '.join(names)}")
        dims = [given.get(name, g) for name, g in zip(names, guess, strict=True)]
    else:
        dims = list(given)
        if len(dims) != len(names):
            raise InputError(f"{len(dims)} cutoffs given; expected {len(names)} "
                             f"(one each for {', '.join(names)})")
    for name, n in zip(names, dims, strict=True):
        if not isinstance(n, (int, np.integer)) or isinstance(n, bool) or n < 2:
            raise InputError(f"cutoff of {name} = {n!r}; expected an integer ≥ 2 "
                             "(Fock-space dimension)")
    return [int(n) for n in dims]
