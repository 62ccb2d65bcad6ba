"""Records made on several threads are the bits of the single-threaded path.

The reference here is the loop records were made with before the pipeline:
blocks of normals drawn one after the other on the calling thread, the
recursion, the carrier and the digitiser, with no executor anywhere. Records
from 1, 2 and 3 worker threads, in memory and streamed to HDF5, with chunk
sizes that cut the normal blocks and the file's chunks at odd places, must
equal it bit for bit; the compressed chunks the pipeline writes itself must
decode with plain h5py to the same counts.
"""

import h5py
import numpy as np
import pytest
from test_records import make

from simulator.errors import InputError
from simulator.records import kernels
from simulator.records.generate import plan_record
from simulator.workflows.record import simulate_record

IF = dict(detection={"intermediate_frequency_hz": 0.41e6}, record={"kind": "if"})
N = 3 * kernels.BLOCK_SAMPLES + 4321  # a record that ends inside a block


def single_threaded(plan, *, with_clipped=False):
    """The counts by the plain sequential loop: the reference bits (and clipped samples)."""
    step = kernels.stepper(plan)
    blocks = kernels.NormalBlocks(plan.seed, kernels.SAMPLE_STREAM, step.width,
                                  kernels.BLOCK_SAMPLES)
    y = np.empty((plan.n_samples, len(plan.chain.model.outputs)))
    mech = np.empty((plan.n_samples, plan.watched.size))
    for pos, xi in blocks.pieces(0, plan.n_samples):
        step(xi, y[pos:pos + len(xi)], mech[pos:pos + len(xi)])
    if plan.chain.receiver == "if":
        y = kernels.rotate_to_carrier(
            y, 0, plan.chain.carrier_rad_s / (2 * np.pi * plan.sample_rate_hz))
    counts, clipped = kernels.Digitiser(plan)(y)
    return (counts, clipped) if with_clipped else counts


@pytest.mark.parametrize("form, sections", [("innovations", {}), ("full-state", {}),
                                            ("innovations", IF)])
def test_same_bits_for_any_worker_count_and_chunk(form, sections, tmp_path):
    scenario = make(samples=N, **sections)
    reference = single_threaded(plan_record(scenario, seed=29, form=form))
    cases = [(1, N), (2, 1000), (2, kernels.BLOCK_SAMPLES + 7), (3, 100_003)]
    for workers, chunk in cases:
        memory = simulate_record(scenario, seed=29, form=form, workers=workers,
                                 chunk_samples=chunk)
        np.testing.assert_array_equal(memory.counts, reference)
        path = tmp_path / f"w{workers}-c{chunk}.h5"
        compression = "deflate" if workers % 2 else "none"
        simulate_record(scenario, seed=29, form=form, workers=workers, chunk_samples=chunk,
                        out=path, compression=compression)
        with h5py.File(path, "r") as f:  # HDF5's own filters decode our chunks
            assert f["samples"].shuffle == (compression == "deflate")
            assert f["samples"].compression == ("gzip" if compression == "deflate" else None)
            np.testing.assert_array_equal(f["samples"][:], reference)


def test_clipped_count_is_that_of_the_whole_record():
    """An iq record is digitised block by block as the recursion makes it: the
    clipped samples, counted per block, add up to the count over the whole
    record, for any chunk size and worker count."""
    import warnings

    from simulator.records.generate import RecordWarning

    full_scale = plan_record(make(samples=N), seed=5).full_scale_v / 6  # about 1.3 sigma
    scenario = make(samples=N, digitizer={"full_scale_v": full_scale})
    counts, clipped = single_threaded(plan_record(scenario, seed=5), with_clipped=True)
    assert 0 < clipped < N
    for workers, chunk in [(1, N), (2, 1000), (3, kernels.BLOCK_SAMPLES + 7)]:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RecordWarning)
            record = simulate_record(scenario, seed=5, workers=workers, chunk_samples=chunk)
        assert record.clipped_samples == clipped
        np.testing.assert_array_equal(record.counts, counts)


def test_file_chunks_cut_across_generator_chunks(tmp_path):
    """Generator chunks longer than the file's and not a multiple of them: the
    rows of a file chunk that two generator chunks share are joined first."""
    from simulator.io import recordfile

    n = recordfile.HDF5_CHUNK_ROWS * 2 + 999
    scenario = make(samples=n)
    path = tmp_path / "long-chunks.h5"
    simulate_record(scenario, seed=3, out=path, chunk_samples=recordfile.HDF5_CHUNK_ROWS + 5,
                    workers=2, compression="deflate")
    reference = simulate_record(scenario, seed=3, workers=1).counts
    with h5py.File(path, "r") as f:
        assert f["samples"].chunks[0] == recordfile.HDF5_CHUNK_ROWS
        np.testing.assert_array_equal(f["samples"][:], reference)


@pytest.mark.parametrize("bad", [0, -2, 1.5, True, "4"])
def test_bad_worker_count_is_refused(bad):
    with pytest.raises(InputError, match="workers"):
        simulate_record(make(samples=1000), seed=1, workers=bad)


def test_unknown_compression_is_refused(tmp_path):
    with pytest.raises(InputError, match="compression = 'lzf'"):
        simulate_record(make(samples=1000), seed=1, out=tmp_path / "r.h5", compression="lzf")
    assert not list(tmp_path.iterdir())


def test_cli_threads_and_compression(tmp_path):
    """`noisechain record --threads 2 --compress` writes the bits of one thread."""
    from conftest import run_cli

    scenario = make(samples=20_000)
    path = tmp_path / "s.toml"
    path.write_text(scenario.to_toml())
    done = run_cli("record", str(path), "--out", str(tmp_path / "a.h5"), "--threads", "2",
                   "--compress", "--quiet", "--seed", "4")
    assert done.returncode == 0, done.stderr
    with h5py.File(tmp_path / "a.h5", "r") as a:
        assert a["samples"].compression == "gzip"
        np.testing.assert_array_equal(a["samples"][:],
                                      simulate_record(scenario, seed=4, workers=1).counts)
