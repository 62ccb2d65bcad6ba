"""Benchmark: pole–residue spectra and the Fisher bound, against the resolvent, in one run.

Prints, for the detection-chain models of the bundled scenarios (4 to 11 states):

* points per second of the 2×2 channel matrix S(ω) from the pole–residue form
  (:func:`simulator.model.poles.pole_form`, compiled kernel above 2¹⁷ points)
  and from the resolvent (``StateSpace.output_spectrum``) on 10⁶ points, the
  ratio, and their largest difference relative to the trace of S;
* the same per noise source (one pass per budget term) against the resolvent
  run once per source;
* CPU milliseconds per occupation bound (``occupation_bound``: three parameters,
  six stepped systems, Fisher matrix and occupation gradient) and, as the
  reference measured in the same run, the same information computed the
  resolvent way: central differences of whole ``output_spectrum`` matrices of
  the stepped models on the record's grid (the continuous record, which needs
  no alias sum; the sampled one by the resolvent costs ~10² times more).

* seconds of ``digitiser_spectrum`` (the default of ``noisechain spectrum``,
  every budget line, on its own grid) with its total from the sampled pole
  form, and by the route it replaced, the ±100-alias sum of resolvent
  densities (``DetectionChain.sampled_spectrum``), side by side, their ratio
  and largest relative difference (the alias sum's truncation).

Times are the best of several runs in CPU time of this process, so that other
jobs on a shared machine do not enter; the ratios are what to compare.
Run: ``.venv/bin/python tests/benchmarks/bench_poles.py``.
"""

import sys
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))

from simulator.analysis.feasibility import (  # noqa: E402
    _grid,
    _sample_rate,
    default_paths,
    occupation_bound,
)
from simulator.analysis.information import steps  # noqa: E402
from simulator.linear import record_budget  # noqa: E402
from simulator.model.poles import pole_form  # noqa: E402
from simulator.model.statespace import StateSpace  # noqa: E402
from simulator.model.system import System  # noqa: E402
from simulator.scenario.loader import load_scenario  # noqa: E402

POINTS = 1_000_000
RESOLVENT_POINTS = 200_000
REPEATS = 20
NAMES = ("drum_microwave_mK", "membrane_4k", "membrane_phase_noise")


def best(call, repeats):
    """Shortest of ``repeats`` runs in CPU seconds of this process (wall time on a
    machine shared with other jobs counts their time too); with several BLAS
    threads the CPU time is the sum over threads, which only favours the reference."""
    times = []
    for _ in range(repeats):
        t0 = time.process_time()
        call()
        times.append(time.process_time() - t0)
    return max(min(times), 1e-6)


def source_models(model):
    return [StateSpace(A=model.A, B=model.B[:, idx], N=model.N[np.ix_(idx, idx)], C=model.C,
                       D=model.D[:, idx], states=model.states,
                       inputs=tuple(model.inputs[i] for i in idx), outputs=model.outputs)
            for _, idx in model.sources]


def spectra(name, model):
    omega = 2 * np.pi * np.linspace(-2e7, 2e7, POINTS)
    sub = omega[:RESOLVENT_POINTS]
    form = pole_form(model)
    form.spectrum(omega[:1000])  # compile (cached) and warm up
    t_pole = best(lambda: form.spectrum(omega), 3)
    t_res = best(lambda: model.output_spectrum(sub), 3)
    exact = model.output_spectrum(sub[::50])
    err = np.max(np.abs(form.spectrum(sub[::50])[0] - exact).max(axis=(1, 2))
                 / np.abs(np.trace(exact, axis1=1, axis2=2)))
    rate_pole, rate_res = POINTS / t_pole, sub.size / t_res
    print(f"{name:<22} states {len(model.states):>2}  total:  poles {rate_pole:12,.0f} points/s"
          f"   resolvent {rate_res:11,.0f} points/s   ratio {rate_pole / rate_res:5.1f}"
          f"   max error {err:.1e}")
    groups = [idx for _, idx in model.sources]
    split = pole_form(model, groups)
    parts = source_models(model)
    t_pole = best(lambda: split.spectrum(omega), 3)
    t_res = best(lambda: [m.output_spectrum(sub) for m in parts], 3)
    rate_pole, rate_res = POINTS / t_pole, sub.size / t_res
    print(f"{'':<22} {len(groups):>2} terms budget:  poles {rate_pole:12,.0f} points/s"
          f"   resolvent {rate_res:11,.0f} points/s   ratio {rate_pole / rate_res:5.1f}")


def resolvent_information(system, paths):
    """Fisher matrix of the continuous record by whole resolvent spectra (the reference)."""
    omega = _grid(system, np.inf)
    s = system.chain.model.output_spectrum(omega)
    x = []
    for path in paths:
        up, down, span = steps(system.scenario, path)
        ds = (System(up).chain.model.output_spectrum(omega)
              - System(down).chain.model.output_spectrum(omega)) / span
        x.append(np.linalg.solve(s, ds))
    x = np.array(x)
    return np.trapezoid(np.einsum("iwab,jwba->ijw", x, x).real, omega / (2 * np.pi), axis=-1)


def bounds(name, scenario):
    system = System(scenario)
    paths = default_paths(scenario)
    occupation_bound(system)
    t_after = best(lambda: occupation_bound(System(scenario)), REPEATS)
    t_before = best(lambda: resolvent_information(System(scenario), paths), 3)
    bound = occupation_bound(system)
    print(f"{name:<22} occupation bound {t_after * 1e3:6.1f} ms (sampled at "
          f"{_sample_rate(system) / 1e6:g} MHz, {bound.method})   resolvent information "
          f"{t_before * 1e3:7.1f} ms   ratio {t_before / t_after:5.1f}")


def digitiser(name, scenario):
    """digitiser_spectrum by the pole form and by the alias sum, on the same system."""
    system = System(scenario)
    exact = record_budget.sampled_density

    def alias_sum(chain, f, fs, aliases):
        return chain.sampled_spectrum(f, fs, aliases=aliases), "alias sum"

    new = record_budget.digitiser_spectrum(system)
    t_new = best(lambda: record_budget.digitiser_spectrum(system), 5)
    record_budget.sampled_density = alias_sum
    try:
        old = record_budget.digitiser_spectrum(system)
        t_old = best(lambda: record_budget.digitiser_spectrum(system), 1)
    finally:
        record_budget.sampled_density = exact
    diff = float(np.max(np.abs(new.total - old.total) / np.abs(new.total)))
    print(f"{name:<22} {new.frequency_hz.size:>5} points, {len(new.contributions):>2} lines:"
          f"  pole form {t_new:7.3f} s   alias sum (±{record_budget.ALIASES}) {t_old:7.3f} s"
          f"   ratio {t_old / t_new:6.1f}   max difference {diff:.1e}")


if __name__ == "__main__":
    scenarios = {name: load_scenario(REPO / "scenarios" / f"{name}.toml") for name in NAMES}
    print(f"channel spectral matrix on {POINTS:,} points (resolvent timed on "
          f"{RESOLVENT_POINTS:,}; rates per CPU second)")
    for name, scenario in scenarios.items():
        spectra(name, System(scenario).chain.model)
    print("digitiser_spectrum with its budget (best of repeats, CPU time)")
    for name, scenario in scenarios.items():
        digitiser(name, scenario)
    print("Fisher bound per operating point (best of repeats, CPU time)")
    for name, scenario in scenarios.items():
        bounds(name, scenario)
