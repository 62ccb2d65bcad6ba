"""The faster kernels give exactly the values of the plain ones.

- numba's compiled ``standard_normal`` on a block's Generator against numpy's
  own ``Generator.standard_normal``: the same ziggurat (Marsaglia and Tsang,
  J. Stat. Softw. 5(8), 2000, as numpy implements it), so the same doubles,
  including the rare draws of the distribution's tail (|x| above the
  ziggurat's last layer, about 3.65), which take another branch.
- the two-channel modal recursion with explicit fused multiply-adds against
  the plain ``fastmath`` kernel, for two, three and four modal coordinates,
  and its in-loop digitiser against the plain digitiser, clipping included.
- a streamed file whose write-back is started early holds the same counts.
"""

import numpy as np
import pytest
from test_records import make
from test_records_bits import two_modes

from simulator.records import fused, kernels, pipeline
from simulator.records.generate import plan_record
from simulator.workflows.record import simulate_record

# numpy's ziggurat for normals: the base of its top layer, beyond which the tail branch
# draws (ziggurat_nor_r in numpy's ziggurat_constants.h; value recalled from memory, used
# only to count how many draws took that branch)
ZIGGURAT_EDGE = 3.6541528853610088


@pytest.mark.parametrize("seed", [0, 29, 2**63 - 1])
def test_numba_normals_are_numpys(seed):
    """1.8·10⁶ draws per seed (three block widths), compared as bit patterns."""
    tail = 0
    for stream, index, width in [(1, 0, 2), (1, 7, 1), (0, 3, 3)]:
        size = 400_000 if width < 3 else 200_000
        ours = pipeline.draw_block(seed, stream, index, size, width)
        numpys = pipeline.block_generator(seed, stream, index).standard_normal((size, width))
        np.testing.assert_array_equal(ours.view(np.int64), numpys.view(np.int64))
        tail += int(np.count_nonzero(np.abs(ours) > ZIGGURAT_EDGE))
    assert tail > 100  # the tail branch was taken, and agreed


def pair_and_plain(plan):
    """The fused kernel's stepper and the plain kernel's arguments, from the same start."""
    step = kernels.stepper(plan)
    assert step.digitised is not None and step.recursion.kind == "modal innovations"
    k = len(step.start) // 2
    parts = [np.ascontiguousarray(x) for x in (
        step.recursion.transition.diagonal()[:k], step.recursion.transition[k:, :k].diagonal(),
        step.recursion.output[:, :k], -step.recursion.output[:, k:],
        step.recursion.drive[:k], step.recursion.drive[k:])]
    state = (step.start[:k].copy(), step.start[k:].copy())
    return step, parts, state


@pytest.mark.parametrize("name", ["iq ideal", "two modes", "iq filtered"])
def test_pair_kernel_repeats_the_plain_kernels_roundings(name):
    scenario = {"iq ideal": make(samples=30_000), "two modes": two_modes(),
                "iq filtered": make(samples=30_000, electronics={"bandwidth_hz": 0.7e6})}[name]
    plan = plan_record(scenario, seed=3)
    step, parts, (m_re, m_im) = pair_and_plain(plan)
    xi = kernels.NormalBlocks(plan.seed, kernels.SAMPLE_STREAM, 2, 1 << 12).take(0, 30_000)
    plain = np.empty((len(xi), 2))
    kernels.modal_innovations_step(*parts, step.recursion.feedthrough, m_re, m_im, xi, plain)
    ours = np.empty_like(plain)
    for lo in range(0, len(xi), 7_001):  # state carried across calls
        step(xi[lo:lo + 7_001], ours[lo:lo + 7_001], None)
    np.testing.assert_array_equal(ours.view(np.int64), plain.view(np.int64))


def test_in_loop_digitiser_is_the_digitiser():
    """Counts, and samples with a clipped channel, as the plain digitiser makes them."""
    scenario = make(samples=20_000)
    full_scale = plan_record(scenario, seed=4).full_scale_v / 8  # about one sigma: clips often
    plan = plan_record(make(samples=20_000, digitizer={"full_scale_v": full_scale}), seed=4)
    digitiser = kernels.Digitiser(plan)
    xi = kernels.NormalBlocks(plan.seed, kernels.SAMPLE_STREAM, 2, 1 << 14).take(0, 20_000)
    y = np.empty((len(xi), 2))
    kernels.stepper(plan)(xi, y, None)
    expected, clipped = digitiser(y)
    counts = np.empty_like(expected)
    step = kernels.stepper(plan)
    got = step.digitised(xi[:9_999], digitiser, counts[:9_999])
    got += step.digitised(xi[9_999:], digitiser, counts[9_999:])
    assert 1_000 < clipped < 20_000 and got == clipped
    np.testing.assert_array_equal(counts, expected)


def test_early_write_back_leaves_the_file_unchanged(tmp_path, monkeypatch):
    """Asked to start writing every few kilobytes, the file still holds the record."""
    import h5py

    from simulator.io import recordfile
    from simulator.io.files import AtomicFile

    monkeypatch.setattr(recordfile, "WRITE_BACK_BYTES", 4096)
    started = []
    start = AtomicFile.start_write_back
    monkeypatch.setattr(AtomicFile, "start_write_back",
                        lambda self: (started.append(1), start(self))[1])
    scenario = make(samples=50_000)
    path = tmp_path / "r.h5"
    simulate_record(scenario, seed=8, out=path, chunk_samples=3_000, workers=2)
    with h5py.File(path, "r") as f:
        np.testing.assert_array_equal(f["samples"][:],
                                      simulate_record(scenario, seed=8, workers=1).counts)
    assert len(started) >= 16 and [p.name for p in tmp_path.iterdir()] == ["r.h5"]


def test_plain_kernel_beyond_the_pair_kernels_reach(monkeypatch):
    """A plan with more modal coordinates than the pair kernel takes runs the
    plain kernel and its separate digitiser: the same record."""
    scenario = make(samples=30_000)
    reference = simulate_record(scenario, seed=6, workers=1).counts
    monkeypatch.setattr(fused, "PAIR_MODES_MOST", 1)
    assert kernels.stepper(plan_record(scenario, seed=6)).digitised is None
    np.testing.assert_array_equal(simulate_record(scenario, seed=6, workers=2).counts, reference)


def test_numpys_own_loop_where_numba_would_differ(monkeypatch):
    """Where numba's normals would not be numpy's, blocks come from numpy's loop: the
    same record, only slower."""
    scenario = make(samples=20_000)
    reference = simulate_record(scenario, seed=2, workers=1).counts
    assert pipeline.compiled_normals_are_numpys()
    monkeypatch.setattr(pipeline, "compiled_normals_are_numpys", lambda: False)
    monkeypatch.setattr(fused, "fill_normals", None)  # would fail if called
    np.testing.assert_array_equal(simulate_record(scenario, seed=2, workers=2).counts, reference)
