"""Classical laser noise and the calibration tone as parts of the one linear model.

The drive's phase φ(t) = φ_W(t) + φ_S(t) has a random-walk part φ_W from white
frequency noise δω = φ̇_W (a Lorentzian line of FWHM Δν_L) and a stationary
part φ_S (a flat floor over a band and a resonant peak, each white noise
through a filter). With the input written ā_in e^{−iφ} (frequency ω_L + φ̇),
the model works in the frame that co-rotates with φ_W, where

- δω shifts the detuning, exactly as cavity-frequency motion does:
  d(δa)/dt gains iᾱ δω, i.e. dY/dt gains √2 ᾱ δω (ᾱ real), the place where
  the mechanics enters through 2g q; no state is needed and φ_W never appears;
- φ_S and the tone φ_tone = φ0 cos Ω t remain input modulations,
  δa_in = −iā_in (φ_S + φ_tone), entering through √κ_ex and the direct
  reflection; white relative intensity noise ε adds δa_in = ā_in ε/2;
- the detected field is referred to the local oscillator (LO):
  measured = δa_out − iā_out ρ, ā_out = ā_in − √κ_ex ᾱ the reflected carrier,
  ρ = [φ_W(t) − φ_W,LO(t)] − φ_S,LO(t).

LO phase references (``detection.local_oscillator_source``):

- common (a copy of the drive, extra path delay τ): φ_LO(t) = φ(t − τ). The
  delay is replaced by its first-order Padé approximant
  e^{−sτ} ≈ (1 − sτ/2)/(1 + sτ/2), so φ_W(t) − φ_W(t − τ) = τ δω/(1 + sτ/2):
  one state ξ, dξ/dt = −(2/τ)ξ + 2δω − (4/τ)φ_S, ρ = ξ + φ_S. Its variance
  for white δω is exactly the phase diffusion 2πΔν_L τ; its spectrum errs by
  (ωτ)²/6 at ωτ ≪ 1 (exact: 4 sin²(ωτ/2)/ω²), so ωτ ≤ 0.5 is required at
  every mechanical frequency. τ = 0: ρ = −φ_S, no state.
- locked (a separate source with a first-order phase lock of bandwidth ω_B):
  dφ_LO/dt = ω_B (φ − φ_LO), so dρ/dt = −ω_B ρ + δω − ω_B φ_S.
- independent (a separate source): ρ = φ_W − φ_S,LO. φ_W is a random walk —
  the beat note diffuses and no stationary spectrum exists, so white
  frequency noise is refused (on the drive and on the LO alike); the LO's own
  stationary noise φ_S,LO (``[detection.local_oscillator_phase_noise]``:
  floor and peak, states ``laser.lo.*``) beats with the reflected carrier and
  adds imprecision only: it never reaches the cavity.

The tone is on the drive path only (the electro-optic modulator sits after
the LO is split off), so the LO never carries it. LO intensity noise is
cancelled by balanced detection (common practice) and not modelled.

With several tones (``[[tones]]``) every tone is made by a laser: its own
(``noise_source = "own"``, its tables) or another tone's (the same φ and, unless
it has its own intensity table, the same ε; :func:`simulator.scenario.tone_sections.noise_lasers`).
Each laser's inputs and filters are built once, named after the tone that owns
it (``laser.*`` for the drive, ``laser.tones.<tone>.*``), and enter every tone
it makes with that tone's own ᾱ, ā_in and ā_out, in that tone's frame. The
LO reference above is taken from the laser of each demodulated tone
(``detection.tone``, or every tone of ``detection.tones``: one local
oscillator, each demodulator referred to its tone's laser; a reference with
a filter state — a delayed copy or a lock — needs the demodulated tones to
share one laser) and enters those tones' outputs; the output of a tone not
demodulated is its field in its own laser's frame (ρ = 0, no LO).

Every classical input is a white input of the model, named ``laser.*``, with
its own two-sided intensity (no vacuum ½); the tone input has intensity 0
and is used only through its transfer function (lines in spectra, a
sinusoid in records).

References
----------
Rabl, Genes, Hammerer, Aspelmeyer, Phys. Rev. A 80, 063819 (2009) (phase
noise in optomechanical cooling).
Jayich et al., New J. Phys. 14, 115018 (2012); Safavi-Naeini et al., New J.
Phys. 15, 035007 (2013) (laser noise in cooling and sideband thermometry).
Di Domenico, Schilt, Thomann, Appl. Opt. 49, 4801 (2010) (linewidth and
frequency-noise density).
Gorodetsky et al., Opt. Express 18, 23236 (2010) (phase-modulation calibration).
"""

import dataclasses

import numpy as np

from simulator.errors import InputError
from simulator.model.laser_blocks import Blocks, quad, stationary_shapes
from simulator.model.laser_spectra import (  # noqa: F401  (the shapes are part of this module's API)
    floor_shape,
    frequency_noise_density,
    input_occupation,
    peak_shape,
    phase_noise_density,
)
from simulator.model.statespace import StateSpace
from simulator.model.units import angular
from simulator.scenario.tone_sections import (  # is_quiet: part of this module's API
    PRIMARY_TONE,
    detected_tone_names,
    is_quiet,  # noqa: F401
    noise_lasers,
    noise_tables,
)

PREFIX = "laser."
TONE_INPUT = "laser.tone"


# -- the state-space model ----------------------------------------------------------

@dataclasses.dataclass(frozen=True)
class _Field:
    """One tone's field in the model: its rows and the mean fields its noise rides on."""

    name: str
    mode: int  # index of its cavity mode
    rows: slice  # its cavity quadratures (X, Y) among the states
    out: slice  # its output quadratures
    alpha: float  # intracavity mean field, chosen real
    a_in: complex  # incoming carrier ā_in (photon flux |ā_in|²)
    a_out: complex  # reflected carrier ā_out = ā_in − √κ_ex ᾱ
    root_kex: float  # √κ_ex of its cavity mode's port

    @classmethod
    def of(cls, name, mode, rows, out, photons, kappa_hz, kappa_ex_hz, detuning_hz):
        kappa, kappa_ex, delta = (float(x) for x in angular([kappa_hz, kappa_ex_hz,
                                                             detuning_hz]))
        alpha = np.sqrt(photons)
        root = np.sqrt(kappa_ex)
        return cls(name, mode, rows, out, alpha, alpha * (kappa / 2 - 1j * delta) / root,
                   alpha * (kappa / 2 - kappa_ex - 1j * delta) / root, root)

    @property
    def port(self):
        """Cavity rows of a phase modulation −iā_in φ entering through √κ_ex."""
        return self.root_kex * quad(-1j * self.a_in)

    @property
    def direct(self):
        """Output rows of the promptly reflected phase modulation −iā_in φ."""
        return quad(-1j * self.a_in)


def tone_fields(model, point):
    """A :class:`_Field` per drive tone (the drive first), placed in ``model``."""
    if not point.several_tones:
        return [_Field.of(PRIMARY_TONE, 0, slice(0, 2), slice(0, 2), point.photon_number,
                          point.cavity_linewidth_hz, point.external_linewidth_hz,
                          point.detuning_effective_hz)]
    out = []
    for k, tone in enumerate(point.tones):
        cav = point.cavity_modes[tone.cavity_mode]
        r = 0 if k == 0 else model.index(f"{tone.name}.X")
        out.append(_Field.of(tone.name, tone.cavity_mode, slice(r, r + 2),
                             slice(2 * k, 2 * k + 2),
                             tone.photon_number, cav.linewidth_hz,
                             cav.external_linewidth_hz, tone.detuning_effective_hz))
    return out


def _labels(laser, several=True):
    """(name prefix, source label) of a laser's inputs, named by the tone it belongs to.

    With several tones every laser's sources say their tone the same way, the
    drive's too ("phase-noise floor of tone drive", :func:`tone_source`); with
    the drive alone they read "laser phase-noise floor".
    """
    prefix = "laser." if laser == PRIMARY_TONE else f"laser.tones.{laser}."
    if laser == PRIMARY_TONE and not several:
        return prefix, lambda kind: f"laser {kind}"
    return prefix, lambda kind: tone_source(kind, laser)


def tone_source(kind, tone):
    """Source name of noise ``kind`` owned by ``tone`` in a model of several tones
    (``kind`` itself for ``tone`` None: the drive alone)."""
    return kind if tone is None else f"{kind} of tone {tone}"


def laser_model(model, scenario, point, demodulated=None):
    """``model`` with every tone's classical noise, the LO reference and the tone appended.

    Parameters
    ----------
    model : simulator.model.statespace.StateSpace
        The cavity–mechanics model of :func:`simulator.model.optomechanics.linear_model`.
    scenario : simulator.scenario.loader.Scenario
    point : simulator.model.operating_point.OperatingPoint
    demodulated : sequence of str, optional
        The tones whose outputs are referred to the local oscillator; default
        the scenario's (``detection.tones`` or ``detection.tone``). The joint
        bound of a set of recorded tones gives its own set
        (:func:`simulator.model.tone_channels.tones_chain`).

    Returns
    -------
    StateSpace
        New states ``laser.*`` after the mechanics, new inputs ``laser.*``
        after the baths; the outputs and the optomechanical ``coupling`` are
        those of ``model``. See the module docstring for the equations. The
        drive's noise is named ``laser.*``; that of a tone with a laser of its
        own ``laser.tones.<tone>.*``. A laser's noise enters every tone made
        by it (``noise_source``), each in its own frame and with its own mean
        field; the local oscillator is referred to the laser of the detected
        tone (``detection.tone``) and enters that tone's output only.
    """
    det = scenario.detection
    fields = tone_fields(model, point)
    lasers = noise_lasers(scenario)
    who = "detection.tones: the tones" if demodulated is None else "joint bound: the tones"
    demodulated = tuple(demodulated or detected_tone_names(scenario))
    seen = set(demodulated)  # the demodulated tones
    detected_lasers = _unique(lasers[name][0] for name in demodulated)
    blocks = Blocks()
    phase_lasers = _unique(lasers[f.name][0] for f in fields)  # the drive's first
    intensities = _unique(lasers[f.name][1] for f in fields)
    # states: the drive's shapes, the LO's and its reference (their one-tone places), then
    # the shapes of the tones' own lasers
    several = len(fields) > 1
    phases = {PRIMARY_TONE: stationary_shapes(blocks, scenario.drive.phase_noise,
                                               *_labels(PRIMARY_TONE, several))}
    lo_rows = stationary_shapes(blocks, det.local_oscillator_phase_noise, "laser.lo.",
                                 lambda kind: f"local-oscillator {kind}", peak="phase-noise peak")
    reference = _reference(blocks, det)
    if reference is not None and len(detected_lasers) > 1:
        raise InputError(
            f"{who} {', '.join(map(repr, sorted(seen)))} come from "
            f"{len(detected_lasers)} lasers ({', '.join(map(repr, detected_lasers))}) and "
            f'detection.local_oscillator_source = "{det.local_oscillator_source}" refers '
            "each demodulator to its own laser through a filter state, which is modelled "
            "for one laser only; expected the demodulated tones to share one laser "
            '(noise_source) or local_oscillator_source = "common" with no delay, or '
            '"independent"')
    for laser in phase_lasers[1:]:
        phases[laser] = stationary_shapes(blocks, noise_tables(scenario, laser)[0],
                                           *_labels(laser))
    frequency = {}  # laser -> its frequency input
    for laser in phase_lasers:
        prefix, label = _labels(laser, several)
        linewidth = noise_tables(scenario, laser)[0].linewidth_hz
        if linewidth > 0:
            frequency[laser] = k = blocks.add_input(f"{prefix}frequency",
                                                    frequency_noise_density(linewidth),
                                                    label("frequency noise"))
            for f in fields:
                if lasers[f.name][0] == laser:
                    blocks.cavity[k].append((f.rows, quad(1j * f.alpha)))
        if laser in intensities:
            _intensity(blocks, scenario, laser, fields, lasers, several)
        if laser == PRIMARY_TONE and scenario.drive.calibration_tone.depth_rad > 0:
            k = blocks.add_input(TONE_INPUT, 0.0, "calibration tone")
            blocks.cavity[k].append((fields[0].rows, fields[0].port))
            blocks.output[k].append((fields[0].out, fields[0].direct))
    for laser in intensities:
        if laser not in phases:  # a tone's own intensity noise on a shared laser
            _intensity(blocks, scenario, laser, fields, lasers, several)
    own = detected_lasers[0]
    if reference is not None and own in frequency:
        blocks.drive(frequency[own], reference[0], reference[1])
    return _assemble(model, blocks, fields, {f.name: phases[lasers[f.name][0]] for f in fields},
                     lo_rows, reference, det, seen)


def _intensity(blocks, scenario, laser, fields, lasers, several):
    """Append ``laser``'s white intensity noise ε, entering as ā_in ε/2 every tone it reaches.

    ε is white, so a tone l it reaches also puts noise into the band of every
    other tone k on its cavity mode, at k's carrier ± Ωm, ω_k − ω_l ± Ωm from
    its own. In k's frame that noise rotates at the spacing; kept to the
    per-tone model's order (terms rotating at the spacing dropped) it is a
    phase-insensitive white input of occupation Σ_l Φ_l S̄_εε/4 on both of
    k's quadratures, independent of the rest (other frequencies of ε), with
    the same source name.
    """
    rin = noise_tables(scenario, laser)[1].relative_intensity_noise_per_hz
    if rin > 0:
        prefix, label = _labels(laser, several)
        k = blocks.add_input(f"{prefix}intensity", rin / 2, label("intensity noise"))
        reached = [f for f in fields if lasers[f.name][1] == laser]
        for f in reached:
            blocks.cavity[k].append((f.rows, f.root_kex * quad(f.a_in / 2)))
            blocks.output[k].append((f.out, quad(f.a_in / 2)))
        for f in fields:
            level = sum(abs(o.a_in) ** 2 for o in reached if o is not f and o.mode == f.mode)
            for x, unit in (("X", [1.0, 0.0]), ("Y", [0.0, 1.0])) if level > 0 else ():
                k = blocks.add_input(f"{prefix}intensity.{f.name}.{x}", level * rin / 8,
                                     label("intensity noise"))
                blocks.cavity[k].append((f.rows, f.root_kex * np.array(unit)))
                blocks.output[k].append((f.out, np.array(unit)))


def _unique(names):
    """``names`` in order of first appearance, each once."""
    return list(dict.fromkeys(names))


def _reference(blocks, det):
    """The LO reference's state (common and delayed, or locked), or None: (rows, δω gain,
    φ_S gain)."""
    source, tau = det.local_oscillator_source, det.local_oscillator_delay_s
    if source == "common" and tau > 0:
        return blocks.add_states(["laser.reference"], [[-2.0 / tau]]), 2.0, 4.0 / tau
    if source == "locked":
        wb = float(angular(det.local_oscillator_lock_bandwidth_hz))
        return blocks.add_states(["laser.reference"], [[-wb]]), 1.0, wb
    return None


def _assemble(model, blocks, fields, phase_rows, lo_rows, reference, det, seen):
    """One StateSpace from the base model and the laser blocks."""
    n0, m0 = len(model.states), len(model.inputs)
    nl, ml = len(blocks.states), len(blocks.inputs)
    n, m = n0 + nl, m0 + ml
    a = np.zeros((n, n))
    a[:n0, :n0] = model.A
    a[n0:, n0:] = blocks.a
    b = np.zeros((n, m))
    b[:n0, :m0] = model.B
    c = np.zeros((len(model.outputs), n))
    c[:, :n0] = model.C
    d = np.zeros((len(model.outputs), m))
    d[:, :m0] = model.D
    for k in range(ml):
        for rows, column in blocks.cavity[k]:
            b[rows, m0 + k] = column
        for rows, column in blocks.output[k]:
            d[rows, m0 + k] = column
        if k in blocks.b:
            b[n0:n0 + blocks.b[k].size, m0 + k] = blocks.b[k]
    source, tau = det.local_oscillator_source, det.local_oscillator_delay_s
    referenced = False  # the reference state is driven by the (one) demodulated laser once
    for f in fields:
        phase = np.zeros(nl)  # φ_S of the tone's laser as a row over the laser states
        for rows, row in phase_rows[f.name]:
            phase[rows] = row
        a[f.rows, n0:] = np.outer(f.port, phase)
        ref = quad(-1j * f.a_out)
        if f.name not in seen:  # a tone nobody demodulates: its field in its laser's frame
            c[f.out, n0:] += np.outer(f.direct, phase)
        elif source == "common" and tau == 0:
            # −iā_in φ_S + iā_out φ_S = −i√κ_ex ᾱ φ_S
            c[f.out, n0:] += np.outer(quad(-1j * f.root_kex * f.alpha), phase)
        elif reference is None:
            c[f.out, n0:] += np.outer(f.direct, phase)
        else:
            rows, _, gain = reference
            r = rows.start
            if not referenced:
                a[n0 + r, n0:] += -gain * phase
                referenced = True
            c[f.out, n0 + r] += ref
            c[f.out, n0:] += np.outer(f.direct + (ref if source == "common" else 0.0), phase)
        if f.name in seen:  # one local oscillator for every demodulator
            for rows, row in lo_rows:  # ρ gains −φ_S,LO: the measured field gains +iā_out φ_S,LO
                c[f.out, n0 + rows.start:n0 + rows.stop] -= np.outer(ref, row)
    n_total = np.zeros((m, m))
    n_total[:m0, :m0] = model.N
    n_total[m0:, m0:] = np.diag(blocks.intensity)
    coupling = np.zeros((n, n))
    coupling[:n0, :n0] = model.coupling
    merged = {}  # one source per name: a noise may have several inputs
    for name, k in blocks.sources:
        merged[name] = merged.get(name, ()) + (m0 + k,)
    sources = tuple(model.sources) + tuple(merged.items())
    return StateSpace(A=a, B=b, N=n_total, C=c, D=d, states=model.states + tuple(
        blocks.states), inputs=model.inputs + tuple(blocks.inputs), outputs=model.outputs,
        sources=sources, coupling=coupling)


def vacuum_intensity(model):
    """Vacuum part of each input's intensity: ½ for quantum inputs, 0 for ``laser.*``."""
    return np.array([0.0 if name.startswith(PREFIX) else 0.5 for name in model.inputs])


def device_eigenvalues(model, also=()):
    """Eigenvalues of the drift without the ``laser.*`` states (and any prefix in ``also``).

    The laser-noise filters drive the cavity but are not driven by it, so the
    drift is block triangular and these are exactly the cavity–mechanics
    eigenvalues: what sets the default spectrum span and the sample rate.
    """
    keep = [i for i, s in enumerate(model.states) if not s.startswith((PREFIX, *also))]
    return np.linalg.eigvals(model.A[np.ix_(keep, keep)])
