"""Benchmark: synthetic records — speed against the bounds and baselines, and memory.

Prints, measured side by side in one run:

1. Innovations form against the random-number bound. The innovations form
   needs p normals per sample (p = 2 for an iq record). The bound is the time
   numpy's Generator takes to draw those normals alone (the same blocks the
   generator uses); the ratio (normals alone)/(normals + recursion) is the
   fraction of the bound reached. Target: at least 0.5 on one core. The raw
   numpy.random.default_rng().standard_normal throughput is printed beside.
2. Full state form per simulated sample against
   (a) a plain numpy Euler–Maruyama loop of the same linear model (a Python
       loop over time steps, SUBSTEPS steps per sample, integrating the output
       over each sample interval) — which, unlike the exact form, still has a
       time-step error; and
   (b) QuTiP's stochastic master-equation solver with heterodyne detection on
       a small Fock-space truncation of the same linearised model.
3. The innovations recursion in eigen-coordinates (modal kernel) against the
   dense kernel on the same plan and normals, and the one-off cost of building
   and verifying the modal form (its reconstruction check).
4. Peak memory (resident set size) of a long record streamed to an HDF5 file,
   measured in a fresh process. The target is 10⁹ samples in under
   500 MB: pass ``--samples 1e9`` for it (an hour or so on one core); the
   default is shorter so the benchmark finishes in minutes. Memory must not
   depend on the length, which the printout of two lengths shows.
5. A streamed record on every core. Side by side: the single-core bound
   (the sample stream's normals drawn block after block on one thread, as
   records draw them, and with numpy's own loop), the recursion alone and
   the record's sequential loop (recursion and digitiser; normals drawn
   beforehand), and whole records streamed to HDF5 with 1 worker thread and
   with one per core, raw and deflated; each stage's core time per sample
   (drawing, sequential loop, file write) with the ceilings they set; the
   load average before and after, and the core time all threads spent per
   sample. Target: the raw stream on all cores reaches 0.8 × (cores ×
   single-core bound), or the sequential loop's own rate where that is
   lower. ``--modes 8`` makes the recursion the limit on 2 cores (its loop
   longer than drawing and writing together); the record should then run
   at the loop's own rate.
6. Compression of the counts: size against write speed for HDF5's built-in
   filters through h5py (none, shuffle, gzip levels, lzf), the registered
   filters of hdf5plugin when it is importable, and this package's own
   deflate on 1 and all threads.
7. A synthetic averaged spectrum (drawn from its exact law) of a 1 s and a
   one-hour record, against the time the time-domain route (stream the
   record, then average its periodograms) would take at the rate of 5.
8. A scheduled record (three segments: a kick, the tone off, a new
   detuning) on the same threaded pipeline: generation alone (planned once,
   counts discarded) with 1 worker thread and with one per core, beside the
   stationary full-state record of the same length and scenario on 1 and all
   threads. The ratios threaded / single-thread of the two should match:
   the segments cost only a switch of matrices at each boundary.

The machine may be shared: absolute rates vary from run to run, the ratios
measured side by side in one run are what count.

Run: ``.venv/bin/python tests/benchmarks/bench_records.py [--samples N]
[--kernel-samples N] [--skip-qutip] [--only 5,6]``.
"""

import argparse
import functools
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/ for conftest

from conftest import mode, scenario_with_coupling  # noqa: E402

from simulator.records.discretize import modal_form  # noqa: E402
from simulator.records.generate import plan_record  # noqa: E402
from simulator.records.kernels import (  # noqa: E402
    BLOCK_SAMPLES,
    SAMPLE_STREAM,
    stepper,  # noqa: E402
)

REPO = Path(__file__).resolve().parents[2]
SUBSTEPS = 20  # Euler–Maruyama steps per sample (dt·κ/2 ≈ 0.02 at the rates below)


def scenario(seconds=1.0):
    """An invented sideband-cooling scenario with low occupations (QuTiP can truncate it)."""
    s = scenario_with_coupling(g_hz=40e3, linewidth_hz=600e3, detuning_hz=-300e3, modes=[
        mode(frequency_hz=300e3, linewidth_hz=3e3, coupling_hz=200.0, bath_occupation=0.5,
             effective_mass_kg=1e-13)])
    return s.replace("digitizer.sample_rate_hz", 2e6).replace("record.duration_s", seconds)


def best_of(fn, repeats=3):
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def innovations_against_normals(n):
    from simulator.records import kernels

    plan = plan_record(scenario(n / 2e6), form="innovations")
    step = stepper(plan)
    width = step.width
    p = len(plan.chain.model.outputs)
    y = np.empty((n, p))
    mech = np.empty((n, 0))
    step(kernels.NormalBlocks(0, 1, width, BLOCK_SAMPLES).take(0, 1000), y[:1000], mech)

    def draw():
        for _ in kernels.NormalBlocks(plan.seed, SAMPLE_STREAM, width, BLOCK_SAMPLES).pieces(0, n):
            pass

    def both():
        blocks = kernels.NormalBlocks(plan.seed, SAMPLE_STREAM, width, BLOCK_SAMPLES)
        for pos, xi in blocks.pieces(0, n):
            step(xi, y[pos:pos + len(xi)], mech[pos:pos + len(xi)])

    rng = np.random.default_rng(1)
    t_raw = best_of(lambda: rng.standard_normal(n * width))
    t_draw, t_both = best_of(draw), best_of(both)
    modal = step.recursion.kind
    print(f"1. innovations form, {n:.3g} samples, {width} normals/sample, {modal} kernel")
    print(f"   raw numpy normals:        {n * width / t_raw / 1e6:8.1f} M normals/s")
    print(f"   normals in blocks:        {n / t_draw / 1e6:8.2f} M samples/s (the bound)")
    print(f"   normals + recursion:      {n / t_both / 1e6:8.2f} M samples/s")
    print(f"   fraction of raw numpy:    {n * width / (n * width / t_raw) / t_both:8.2f}   "
          "(target >= 0.5)")
    print(f"   fraction of block draws:  {t_draw / t_both:8.2f}")
    same_normals_as_numpy(4 * 10**6)


def same_normals_as_numpy(per_seed, seeds=(0, 29, 2**63 - 1)):
    """Records' blocks of normals (numba) against numpy's Generator, bit for bit."""
    from simulator.records.fused import fill_normals
    from simulator.records.pipeline import block_generator

    differ, ours = 0, np.empty((BLOCK_SAMPLES, 2))
    for seed in seeds:
        for k in range(-(-per_seed // (2 * BLOCK_SAMPLES))):
            fill_normals(block_generator(seed, SAMPLE_STREAM, k), ours)
            theirs = block_generator(seed, SAMPLE_STREAM, k).standard_normal((BLOCK_SAMPLES, 2))
            differ += int(np.count_nonzero(ours.view(np.int64) != theirs.view(np.int64)))
    total = len(seeds) * -(-per_seed // (2 * BLOCK_SAMPLES)) * 2 * BLOCK_SAMPLES
    print(f"   numba's normals against numpy's Generator: {total:.3g} draws, {len(seeds)} seeds, "
          f"{differ} differ")


def modal_against_dense(n):
    from simulator.records import kernels

    plan = plan_record(scenario(n / 2e6), form="innovations")
    normals = kernels.NormalBlocks(plan.seed, SAMPLE_STREAM, 2, BLOCK_SAMPLES).take(0, n)
    y = np.empty((n, len(plan.chain.model.outputs)))
    mech = np.empty((n, 0))
    times = {}
    for modal in (True, False):
        step = stepper(plan, modal=modal)
        step(normals[:1000], y[:1000], mech[:1000])  # compiled before timing
        times[step.recursion.kind] = best_of(lambda step=step: step(normals, y, mech))
    inn = plan.innovations
    drive = inn.gain @ np.linalg.cholesky(inn.innovation_covariance)
    t_setup = best_of(lambda: modal_form(inn.transition, inn.output, drive))
    t_modal, t_dense = times["modal innovations"], times["innovations"]
    print(f"3. innovations recursion alone, {n:.3g} samples (normals drawn beforehand)")
    print(f"   modal kernel:             {n / t_modal / 1e6:8.2f} M samples/s")
    print(f"   dense kernel:             {n / t_dense / 1e6:8.2f} M samples/s")
    print(f"   modal / dense speed:      {t_dense / t_modal:8.2f}")
    print(f"   modal form built and verified once: {t_setup * 1e3:.2f} ms "
          f"({t_setup / t_modal:.2g} of the recursion's time)")


def euler_maruyama(model, dt, samples, substeps, rng):
    """Plain Euler–Maruyama of dx = A x dt + B dW, output averaged over each sample."""
    a, b, c, d = model.A, model.B, model.C, model.D
    root = np.linalg.cholesky(model.N + 1e-300 * np.eye(len(model.N)))
    x = np.zeros(len(model.states))
    out = np.empty((samples, len(model.outputs)))
    for k in range(samples):
        acc = np.zeros(len(model.outputs))
        for _ in range(substeps):
            dw = root @ rng.standard_normal(len(model.N)) * np.sqrt(dt)
            acc += c @ x * dt + d @ dw
            x = x + a @ x * dt + b @ dw
        out[k] = acc / (dt * substeps)
    return out


def qutip_heterodyne(plan, samples, substeps):
    """qutip.smesolve, heterodyne, on the linearised model truncated to small Fock spaces."""
    import qutip

    from simulator.model.units import angular

    point = plan.scenario
    sc, m0 = point, point.mechanics[0]
    from simulator.model.operating_point import operating_point

    op = operating_point(sc)
    kappa, kappa_ex = angular([sc.cavity.linewidth_hz, sc.cavity.external_linewidth_hz])
    delta, om, gm, g = angular([op.detuning_effective_hz, m0.frequency_hz, m0.linewidth_hz,
                                op.modes[0].coupling_rate_hz])
    n_th = op.modes[0].bath_occupation
    a = qutip.tensor(qutip.destroy(4), qutip.qeye(6))
    b = qutip.tensor(qutip.qeye(4), qutip.destroy(6))
    h = -delta * a.dag() * a + om * b.dag() * b - g * (a + a.dag()) * (b + b.dag())
    c_ops = [np.sqrt(gm * (n_th + 1)) * b, np.sqrt(gm * n_th) * b.dag()]
    if kappa > kappa_ex:
        c_ops.append(np.sqrt(kappa - kappa_ex) * a)
    rho0 = qutip.ket2dm(qutip.tensor(qutip.basis(4, 0), qutip.basis(6, 0)))
    t = 1.0 / plan.sample_rate_hz
    tlist = np.arange(samples + 1) * t
    qutip.smesolve(h, rho0, tlist, c_ops, [np.sqrt(kappa_ex) * a], heterodyne=True, ntraj=1,
                   options={"dt": t / substeps, "store_measurement": True,
                            "progress_bar": False}, seeds=1)


def full_state_against_baselines(n, skip_qutip):
    from simulator.records import kernels

    plan = plan_record(scenario(n / 2e6), form="full-state")
    step = stepper(plan)
    width = step.width
    y = np.empty((n, len(plan.chain.model.outputs)))
    mech = np.empty((n, 0))
    step(kernels.NormalBlocks(0, 1, width, BLOCK_SAMPLES).take(0, 1000), y[:1000], mech)

    def full():
        for pos, xi in kernels.NormalBlocks(plan.seed, 1, width, BLOCK_SAMPLES).pieces(0, n):
            step(xi, y[pos:pos + len(xi)], mech[pos:pos + len(xi)])

    t_full = best_of(full) / n
    em_samples = 2000
    rng = np.random.default_rng(2)
    t_em = best_of(lambda: euler_maruyama(plan.chain.model, 0.5e-6 / SUBSTEPS, em_samples,
                                          SUBSTEPS, rng), repeats=1) / em_samples
    print(f"2. full state form ({width} normals/sample), per simulated sample")
    print(f"   exact full state form:    {t_full * 1e9:10.1f} ns")
    print(f"   numpy Euler–Maruyama:     {t_em * 1e9:10.1f} ns  ({SUBSTEPS} steps/sample; "
          f"ratio {t_em / t_full:8.0f} x slower)")
    if skip_qutip:
        print("   QuTiP smesolve:           skipped (--skip-qutip)")
        return
    q_samples = 200
    t_q = best_of(lambda: qutip_heterodyne(plan, q_samples, 10), repeats=1) / q_samples
    print(f"   QuTiP smesolve heterodyne:{t_q * 1e9:10.1f} ns  (Fock 4 x 6, 10 steps/sample; "
          f"ratio {t_q / t_full:8.0f} x slower)")


STREAM_SCRIPT = """
import resource, sys, time
from pathlib import Path
sys.path.insert(0, {tests!r})
from bench_records import scenario
from simulator.workflows.record import simulate_record
n = int(float(sys.argv[1]))
simulate_record(scenario(1e-3), out=sys.argv[2], seed=1)  # load the compiled kernels
t = time.perf_counter()
r = simulate_record(scenario(n / 2e6), out=sys.argv[2], seed=1, overwrite=True)
dt = time.perf_counter() - t
hwm = [line for line in Path("/proc/self/status").read_text().splitlines()
       if line.startswith("VmHWM")]  # peak RSS of this process image (not inherited)
peak = int(hwm[0].split()[1]) / 1024 if hwm else (
    resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
print(r.n_samples, dt, peak, Path(sys.argv[2]).stat().st_size / 1e6)
"""


def streamed_memory(lengths):
    print("4. streamed record to HDF5 (iq, innovations form), fresh process each")
    script = STREAM_SCRIPT.format(tests=str(Path(__file__).resolve().parent))
    with tempfile.TemporaryDirectory() as tmp:
        for n in lengths:
            path = Path(tmp) / "long.h5"
            out = subprocess.run([sys.executable, "-c", script, str(n), str(path)],
                                 capture_output=True, text=True, check=True, cwd=REPO)
            samples, seconds, rss_mb, size_mb = out.stdout.split()
            print(f"   {int(samples):.3g} samples: peak RSS {float(rss_mb):7.1f} MB "
                  f"(target < 500 MB; ratio {float(rss_mb) / 500:.2f}), "
                  f"{int(samples) / float(seconds) / 1e6:.2f} M samples/s with "
                  f"digitising and writing (raw counts, every core), "
                  f"file {float(size_mb):.0f} MB")
            path.unlink()


def scenario_with_modes(seconds, count):
    """The scenario of :func:`scenario` with ``count`` mechanical modes 37 kHz apart: a
    recursion ``count`` times as long per sample, the same normals (invented numbers)."""
    if count == 1:
        return scenario(seconds)
    modes = [mode(f"m{j}", frequency_hz=300e3 + 37e3 * j, linewidth_hz=3e3, coupling_hz=200.0,
                  bath_occupation=0.5, effective_mass_kg=1e-13) for j in range(count)]
    s = scenario_with_coupling(g_hz=40e3, linewidth_hz=600e3, detuning_hz=-300e3, modes=modes)
    return s.replace("digitizer.sample_rate_hz", 2e6).replace("record.duration_s", seconds)


def every_core(n, repeats, modes=1):
    """Section 5 for a record of ``modes`` mechanical modes; returns the raw rate on every core.

    Printed side by side: the single-core normal bound; the kernel as the
    target was filed (the recursion with its normals, one core: the
    "recursion's own rate" of a single-threaded record); the record's
    sequential loop alone (recursion and digitiser, normals given: what one
    thread must do whatever the others do); the stage times and the ceilings
    they set; whole records on 1 thread and on every core, with the core time
    all threads of the process spent per sample.
    """
    import os
    import resource
    import warnings

    from simulator.records import kernels
    from simulator.records.pipeline import available_cores, block_generator
    from simulator.workflows.record import simulate_record

    cores = available_cores()
    make = functools.partial(scenario_with_modes, count=modes)
    plan = plan_record(make(n / 2e6), form="innovations")
    step = stepper(plan)
    width, blocks = step.width, -(-n // BLOCK_SAMPLES)
    print(f"5. streamed iq record of {n:.3g} samples, {modes} mechanical mode(s), on {cores} "
          f"core(s), M samples/s (load average before: {os.getloadavg()[0]:.2f})")
    t_numpy = best_of(lambda: [block_generator(plan.seed, SAMPLE_STREAM, k).standard_normal(
        (BLOCK_SAMPLES, width)) for k in range(min(blocks, 256))], repeats=2) * blocks / min(
        blocks, 256)
    t_draw = best_of(lambda: [None for _ in kernels.NormalBlocks(
        plan.seed, SAMPLE_STREAM, width, BLOCK_SAMPLES).pieces(0, n)], repeats=2)
    normals = kernels.NormalBlocks(plan.seed, SAMPLE_STREAM, width, BLOCK_SAMPLES).take(
        0, min(n, 1 << 22))
    y, mech = np.empty((len(normals), 2)), np.empty((len(normals), 0))
    t_rec = best_of(lambda: step(normals, y, mech)) * n / len(normals)
    t_seq = sequential_loop(plan, step, normals) * n / len(normals)
    bound, numpy_bound, rec, seq = n / t_draw, n / t_numpy, n / t_rec, n / t_seq
    kernel = 1 / (1 / bound + 1 / seq)  # one core: draw, then recurse and digitise
    target = min(0.8 * cores * bound, seq)
    print(f"   single-core normal bound:  {bound / 1e6:8.2f} (numba's ziggurat, as records draw"
          f" them; numpy's own loop: {numpy_bound / 1e6:.2f})")
    print(f"   recursion alone: {rec / 1e6:8.2f}   the record's sequential loop (recursion and "
          f"digitiser): {seq / 1e6:8.2f}   the kernel on one core (normals, recursion, "
          f"digitiser): {kernel / 1e6:8.2f}")
    print(f"   target: {target / 1e6:.2f} (0.8 x cores x bound, capped by the sequential loop)")
    ceiling = stage_ceiling(plan, y, t_draw / n, t_seq / n, cores)
    with tempfile.TemporaryDirectory() as tmp, warnings.catch_warnings():
        warnings.simplefilter("ignore")
        path = Path(tmp) / "r.h5"
        simulate_record(make(1e-3), out=path, seed=1, overwrite=True)  # compile
        rates = {}
        for compression in ("none", "deflate") if modes == 1 else ("none",):
            for workers in sorted({1, cores}):
                spent = []

                def record(c=compression, w=workers, spent=spent):
                    before = resource.getrusage(resource.RUSAGE_SELF)
                    simulate_record(make(n / 2e6), out=path, seed=1, overwrite=True,
                                    workers=w, compression=c)
                    after = resource.getrusage(resource.RUSAGE_SELF)
                    spent.append(after.ru_utime + after.ru_stime - before.ru_utime
                                 - before.ru_stime)

                rates[compression, workers] = n / best_of(record, repeats=repeats)
                rate = rates[compression, workers]
                print(f"   {compression:8s} {workers} thread(s): {rate / 1e6:8.2f}"
                      f"   / sequential loop {rate / seq:5.2f}"
                      f"   / kernel {rate / kernel:5.2f}"
                      f"   / ceiling {rate / ceiling:5.2f}"
                      f"   / (cores x numpy's bound) {rate / (cores * numpy_bound):5.2f}"
                      f"   speed-up {rate / rates[compression, 1]:4.2f}"
                      f"   core time {1e9 * min(spent) / n:5.1f} ns/sample")
    print(f"   (load average after: {os.getloadavg()[0]:.2f})")
    return rates["none", cores]


def sequential_loop(plan, step, normals):
    """Time of the record's sequential loop over ``normals``: recursion and digitiser, block
    by block (in one kernel where :attr:`Stepper.digitised` exists)."""
    from simulator.records import kernels

    digitiser = kernels.Digitiser(plan)
    counts = np.empty(normals.shape, dtype=digitiser.dtype)
    scratch, mech = np.empty((BLOCK_SAMPLES, 2)), np.empty((BLOCK_SAMPLES, 0))

    def loop():
        for lo in range(0, len(normals), BLOCK_SAMPLES):
            xi, out = normals[lo:lo + BLOCK_SAMPLES], counts[lo:lo + BLOCK_SAMPLES]
            if step.digitised is not None:
                step.digitised(xi, digitiser, out)
            else:
                step(xi, scratch[:len(xi)], mech[:len(xi)])
                digitiser.into(scratch[:len(xi)], out)

    return best_of(loop)


def stage_ceiling(plan, y, draw_ns, sequential_ns, cores):
    """Core time of each stage per sample, and the ceilings they set on ``cores`` cores.

    Every stage costs core time: with all cores busy the streamed rate is at
    most cores / (sum of the stages' core times per sample). The sequential
    loop (recursion and digitiser) runs on the calling thread, the file
    write on the writer thread: the rate is also at most 1 / (the loop's
    time). The flush to the disk is the operating system's wait, started
    early (``AtomicFile.start_write_back``).
    """
    import h5py

    from simulator.io.recordfile import HDF5_CHUNK_ROWS
    from simulator.records import kernels

    counts, _ = kernels.Digitiser(plan)(y)
    rows = min(len(y), HDF5_CHUNK_ROWS)
    with tempfile.TemporaryDirectory() as tmp:
        def write():
            with h5py.File(Path(tmp) / "w.h5", "w", rdcc_nbytes=0) as f:
                d = f.create_dataset("s", shape=counts.shape, dtype=counts.dtype,
                                     chunks=(rows, 2))
                for lo in range(0, len(counts) - rows + 1, rows):
                    d.id.write_direct_chunk((lo, 0), counts[lo:lo + rows])
        t_write = best_of(write) / len(counts)
    stages = {"draw": draw_ns, "recursion + digitiser": sequential_ns, "file write": t_write}
    total = sum(stages.values())
    print("   core time per sample, ns:  " + "   ".join(
        f"{name} {1e9 * t:.1f}" for name, t in stages.items()))
    ceiling = min(cores / total, 1 / sequential_ns)
    print(f"   ceiling with every core busy: {cores / total / 1e6:8.2f}   "
          f"ceiling of the calling thread: {1 / sequential_ns / 1e6:8.2f}   "
          f"= {ceiling * sequential_ns:4.2f} of the sequential loop")
    return ceiling


COMPRESSION_CHUNK = 1 << 18


def compression_options(n):
    import os
    import warnings

    import h5py

    from simulator.io.recordfile import encode_chunk
    from simulator.records.pipeline import available_cores, executor
    from simulator.workflows.record import simulate_record

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        counts = simulate_record(scenario(n / 2e6), seed=1).counts
    raw = counts.nbytes
    options = {"none": {}, "shuffle": dict(shuffle=True), "lzf": dict(compression="lzf"),
               "lzf + shuffle": dict(compression="lzf", shuffle=True)}
    for level in (1, 4, 9):
        options[f"gzip {level}"] = dict(compression="gzip", compression_opts=level)
        options[f"gzip {level} + shuffle"] = dict(compression="gzip", compression_opts=level,
                                                  shuffle=True)
    try:
        import hdf5plugin
    except ImportError:
        hdf5plugin = None
    if hdf5plugin is not None:
        options["[plugin] zstd 1"] = dict(hdf5plugin.Zstd(clevel=1))
        options["[plugin] bitshuffle lz4"] = dict(hdf5plugin.Bitshuffle(cname="lz4"))
        options["[plugin] blosc2 zstd 1 shuffle"] = dict(hdf5plugin.Blosc2(
            cname="zstd", clevel=1, filters=hdf5plugin.Blosc2.SHUFFLE))
        options["[plugin] blosc2 lz4 shuffle"] = dict(hdf5plugin.Blosc2(
            cname="lz4", clevel=5, filters=hdf5plugin.Blosc2.SHUFFLE))
    print(f"6. compression of {n:.3g} iq samples ({counts.std():.0f} counts rms), "
          f"chunks of {COMPRESSION_CHUNK} rows; size relative to the raw counts")
    if hdf5plugin is None:
        print("   (hdf5plugin not importable: registered filters not measured)")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "c.h5"
        for name, kw in options.items():
            def write(kw=kw):
                with h5py.File(path, "w") as f:
                    f.create_dataset("s", data=counts, chunks=(COMPRESSION_CHUNK, 2), **kw)
            t = best_of(write, repeats=2)
            size = os.path.getsize(path) / raw
            print(f"   h5py {name:32s} {raw / t / 1e6:8.0f} MB/s   size {size:.3f}")
    pieces = [counts[i:i + COMPRESSION_CHUNK] for i in range(0, len(counts), COMPRESSION_CHUNK)]
    for workers in sorted({1, available_cores()}):
        with executor(workers) as pool:
            def encode_all(pool=pool):
                return [f.result() for f in [pool.submit(encode_chunk, p, COMPRESSION_CHUNK)
                                             for p in pieces]]
            t = best_of(encode_all, repeats=2)
            size = sum(len(b) for b in encode_all())
        print(f"   noisechain deflate, {workers} thread(s)  {raw / t / 1e6:8.0f} MB/s   "
              f"size {size / raw:.3f}")


def synthetic_spectra(stream_rate):
    from simulator.analysis.synthetic_spectrum import synthetic_averaged_spectrum

    segment = 4096
    synthetic_averaged_spectrum(scenario(1.0), segment_samples=segment, seed=1)  # imports
    times = {}
    for seconds in (1.0, 3600.0):
        times[seconds] = best_of(lambda seconds=seconds: synthetic_averaged_spectrum(
            scenario(1.0), segment_samples=segment, duration_s=seconds, seed=1))
    hour = 3600.0 * 2e6
    print(f"7. synthetic averaged spectrum, segments of {segment} samples at 2 MS/s")
    print(f"   1 s record: {times[1.0] * 1e3:8.1f} ms   one hour: {times[3600.0] * 1e3:8.1f} ms"
          f"   ratio {times[3600.0] / times[1.0]:.2f}")
    if stream_rate:
        route = hour / stream_rate
        print(f"   the time-domain route for the hour at {stream_rate / 1e6:.1f} M samples/s: "
              f"{route:8.0f} s   ratio {route / times[3600.0]:.3g}")


class DiscardSink:
    """A sink that drops the counts: generation alone is timed."""

    def __init__(self, plan, rows=None):
        self.plan = plan

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def write(self, first, counts, mech):
        pass


def scheduled_records(n):
    from simulator.records.generate import generate
    from simulator.records.pipeline import available_cores
    from simulator.records.protocol import plan_protocol

    cores, seconds = available_cores(), n / 2e6
    data = scenario(seconds).to_dict()
    data["schedule"] = {"start": "thermal", "segments": [
        {"name": "kick", "duration_s": seconds / 3, "excite_phonons": 1e4},
        {"name": "off", "duration_s": seconds / 3, "changes": {"drive.power_w": 0.0}},
        {"name": "step", "duration_s": seconds / 3, "changes": {"drive.detuning_hz": -2.5e5}}]}
    from simulator.scenario.loader import scenario_from_dict

    t = time.perf_counter()
    scheduled = plan_protocol(scenario_from_dict(data, source="<bench>"), seed=1)
    t_plan = time.perf_counter() - t
    stationary = plan_record(scenario(scheduled.n_samples / 2e6), seed=1, form="full-state")
    chunk = 1 << 18
    rates = {}
    for name, plan in (("scheduled", scheduled), ("stationary", stationary)):
        generate(plan, DiscardSink(plan), chunk=chunk, workers=1)  # compile, warm
        for workers in sorted({1, cores}):
            rates[name, workers] = plan.n_samples / best_of(
                lambda p=plan, w=workers: generate(p, DiscardSink(p), chunk=chunk, workers=w),
                repeats=2)
    print(f"8. scheduled iq record (3 segments) of {scheduled.n_samples:.3g} samples, full "
          f"state, on {cores} core(s), M samples/s (planned once in {t_plan:.2f} s)")
    for name in ("scheduled", "stationary"):
        one, every = rates[name, 1], rates[name, cores]
        print(f"   {name:10s} 1 thread: {one / 1e6:8.2f}   {cores} threads: {every / 1e6:8.2f}"
              f"   threaded / single-thread {every / one:5.2f}")
    print(f"   scheduled / stationary, {cores} threads: "
          f"{rates['scheduled', cores] / rates['stationary', cores]:5.2f}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=float, default=2e7,
                        help="length of the streamed record (target: 1e9)")
    parser.add_argument("--kernel-samples", type=float, default=2e6)
    parser.add_argument("--skip-qutip", action="store_true")
    parser.add_argument("--repeats", type=int, default=2,
                        help="streamed records of section 5 per setting (the best counts)")
    parser.add_argument("--only", default="1,2,3,4,5,6,7,8", help="sections to run, e.g. 5,6")
    parser.add_argument("--modes", type=int, default=1,
                        help="mechanical modes of section 5's record (8: a recursion that is "
                             "the limit on 2 cores)")
    args = parser.parse_args()
    only = {int(x) for x in args.only.split(",")}
    kernel = int(args.kernel_samples)
    sections = {1: lambda: innovations_against_normals(kernel),
                2: lambda: full_state_against_baselines(kernel // 4, args.skip_qutip),
                3: lambda: modal_against_dense(kernel),
                4: lambda: streamed_memory([int(args.samples) // 10, int(args.samples)]),
                5: lambda: every_core(int(args.samples), args.repeats, args.modes),
                6: lambda: compression_options(kernel)}
    rate = None
    for number, run in sections.items():
        if number in only:
            rate = run() if number == 5 else (run(), rate)[1]
    if 7 in only:
        synthetic_spectra(rate)
    if 8 in only:
        scheduled_records(int(args.samples) // 4)


if __name__ == "__main__":
    main()
