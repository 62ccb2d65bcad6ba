"""Heterodyne records from stochastic-master-equation trajectories.

The Welch spectrum averaged over many short records must agree, within its
statistical error, with the master-equation spectrum sampled the way the
record is: integrate-and-dump over each sample interval gives the aliased
continuous spectrum times sinc² (docs/records.md, "Digitiser"; the white
shot-noise floor stays exactly 1). Heterodyne unravelling: Wiseman and
Milburn, Quantum Measurement and Control (Cambridge, 2010), Ch. 4.
"""

import numpy as np
import pytest
import scipy.signal
from conftest import mode, scenario_with_coupling

from simulator.errors import InputError
from simulator.master.spectra import output_flux_density
from simulator.master.steady import master_steady_state
from simulator.master.trajectories import FORM, master_records
from simulator.workflows.record import master_records_to_files

FS = 10e6


def scenario():
    """Red sideband with a thermal cavity bath: the cavity line sits at ν = +2 MHz
    (above the drive), the mechanical sidebands at ±2 MHz (invented)."""
    s = scenario_with_coupling(
        g_hz=0.2e6, detuning_hz=-2e6, cavity_bath_occupation=0.5,
        modes=[mode(frequency_hz=2e6, linewidth_hz=2e5, coupling_hz=1e3, bath_occupation=0.5)])
    return s.replace("digitizer.sample_rate_hz", FS).replace("detection.efficiency", 1.0)


@pytest.mark.slow
def test_averaged_welch_spectrum_of_records_matches_master_spectrum(tmp_path):
    sc = scenario()
    steady = master_steady_state(sc, "linearised", cutoffs=[5, 7], adapt=False, tolerance=2e-2)
    n_records = 24
    paths = [tmp_path / f"r{i}.h5" for i in range(2)]
    records = master_records(sc, list(range(n_records)), duration_s=2e-5, steady=steady)
    assert records[0].form == FORM and records[0].clipped_samples == 0
    periodograms = []
    for rec in records:
        f, p = scipy.signal.welch(rec.shot_noise_units(), fs=FS, nperseg=32,
                                  return_onesided=False, detrend=False)
        periodograms.append(p)
    periodograms = np.array(periodograms)
    aliases = f[:, None] + np.arange(-3, 4) * FS
    flux, _ = output_flux_density(steady, aliases.ravel())
    expected = 1.0 + (flux.reshape(aliases.shape) * np.sinc(aliases / FS) ** 2).sum(axis=1)
    for band in [(1.2e6, 2.8e6), (-2.8e6, -1.2e6), (-FS / 2, FS / 2)]:
        pick = (f >= band[0]) & (f <= band[1])
        per_record = (periodograms[:, pick] - 1.0).sum(axis=1)
        error = per_record.std(ddof=1) / np.sqrt(n_records)
        assert abs(per_record.mean() - (expected[pick] - 1.0).sum()) < 4 * error, band
    # sign: the cavity line (ν = −Δ = +2 MHz) is at positive frequency of welch(I + iQ)
    up, down = (f > 1.2e6) & (f < 2.8e6), (f < -1.2e6) & (f > -2.8e6)
    assert periodograms[:, up].mean() > periodograms[:, down].mean()
    # the same trajectories written to files in the record format, same bits
    from simulator.io.recordfile import load_record

    written = master_records_to_files(sc, [0, 1], paths, duration_s=2e-5, steady=steady)
    loaded = load_record(paths[1])
    np.testing.assert_array_equal(loaded.counts, records[1].counts)
    assert loaded.truth.occupation[0] == pytest.approx(steady.modes[0].occupation)
    assert written[0].path == paths[0]


def test_record_options_are_checked():
    sc = scenario()
    with pytest.raises(InputError):
        master_records(sc, [], duration_s=1e-6)
    with pytest.raises(InputError):
        master_records(sc, [-1], duration_s=1e-6)
    with pytest.raises(InputError):
        master_records(sc, [1], duration_s=1e-6, step_phase=5.0)
    with pytest.raises(InputError, match="iq"):
        master_records(sc.replace("detection.scheme", "homodyne")
                       .replace("record.kind", "if"), [1], duration_s=1e-6)


def test_cli_record_engine_master(tmp_path):
    import json

    from conftest import run_cli

    from simulator.io.recordfile import load_record

    path = tmp_path / "s.toml"
    path.write_text(scenario().to_toml())
    out = run_cli("record", path, "--engine", "master", "--master-model", "linearised",
                  "--duration", "2e-6", "--seed", "3", "--out", tmp_path / "r.h5", "--json")
    assert out.returncode == 0, out.stderr
    summary = json.loads(out.stdout)
    assert summary["form"] == FORM and summary["samples"] == 20 and summary["seed"] == 3
    record = load_record(tmp_path / "r.h5")
    assert record.counts.shape == (20, 2) and record.kind == "iq"
