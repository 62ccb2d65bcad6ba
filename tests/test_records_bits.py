"""Records keep their bits: digests of the counts of fixed records.

A record is a pure function of the scenario, the seed and the generator
form (docs/records.md). The digests below were taken from the records made
before the kernels were last made faster; every speed-up since must leave
them unchanged. They pin the floating point of this kind of machine (x86-64
with fused multiply-add) and the pinned numpy and numba of constraints.txt:
a new numpy whose Generator draws other normals would change them, and that
change of the records is what this test is there to show.

The cases cover every receiver (iq, if above and below the drive,
homodyne), the filtered chains (more modal coordinates), two mechanical
modes, and the full state form with its stored mechanical quadratures.
"""

import hashlib
import warnings

import pytest
from conftest import mode, scenario_with_coupling
from test_records import CHAINS, FS, make

from simulator.records import kernels
from simulator.scenario.loader import scenario_from_dict
from simulator.workflows.record import simulate_record

N = 2 * kernels.BLOCK_SAMPLES + 777  # three blocks of normals, the last one cut
SEED = 11

DIGESTS = {  # first 32 hex digits of the SHA-256 of the counts (then the mechanics)
    "iq ideal": "145255726fb4ebdc0f2baf58e559454a",
    "iq lossy, filtered, current noise": "c0795f77de69539afdcdc31101fcd3f6",
    "iq amplifier": "45d15904f479cde5e1a721bff566f5f6",
    "if below, filtered": "21b013d6beba9a59d165120e8821ea9a",
    "if above": "6e8cb17e100860953142c955ddc9e7b9",
    "homodyne": "6d4506660aafa3fb0138e5ae23dd52aa",
    "two modes": "a30689655326b29558656ff070164325",
    "full state, mechanics": "9a8c9fe772636bd0a8bea6e3e44e049a",
}


def two_modes():
    base = scenario_with_coupling(g_hz=40e3, linewidth_hz=600e3, detuning_hz=-300e3, modes=[
        mode(frequency_hz=300e3, linewidth_hz=3e3, coupling_hz=200.0, bath_occupation=2.0,
             effective_mass_kg=1e-13),
        mode("m1", frequency_hz=420e3, linewidth_hz=5e3, coupling_hz=150.0,
             bath_occupation=5.0, effective_mass_kg=1e-13)])
    data = base.to_dict()
    data["digitizer"] = {"sample_rate_hz": FS}
    data["record"] = {"duration_s": N / FS}
    return scenario_from_dict(data, source="<test>")


def case(name):
    """(scenario, keyword arguments of simulate_record) of a named case."""
    if name == "two modes":
        return two_modes(), {}
    if name == "full state, mechanics":
        return make(samples=N), dict(form="full-state", store_mechanics=True)
    return make(samples=N, **CHAINS[name]), {}


@pytest.mark.parametrize("name", list(DIGESTS))
@pytest.mark.parametrize("workers", [1, 2])
def test_record_bits_are_unchanged(name, workers):
    scenario, kw = case(name)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        record = simulate_record(scenario, seed=SEED, workers=workers, chunk_samples=50_001,
                                 **kw)
    digest = hashlib.sha256(record.counts.tobytes())
    if record.mechanical_quadratures is not None:
        digest.update(record.mechanical_quadratures.tobytes())
    assert digest.hexdigest()[:32] == DIGESTS[name]
