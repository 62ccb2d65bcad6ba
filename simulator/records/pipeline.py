"""Record generation on every core, the same bits as on one.

The random normals of a record come in blocks, each from its own generator
(:func:`draw_block`); the numba kernels that fill a block and run the
recursion release the GIL (``nogil``), and so do zlib's compressor and
numpy's bulk array operations. So a few threads overlap the work of a
record: blocks of normals are drawn ahead (:class:`NormalBlocks` with an
executor), the sequential recursion runs on the calling thread, and each
finished chunk is rotated, digitised and compressed by the pool
(:class:`OrderedStage`) while the next chunk's recursion runs, then written
in order by one writer thread (:func:`writer`). (An iq record without a
tone is digitised on the calling thread, in the recursion's own loop; the
pool then only compresses.) Every step is a pure function
of the sample indices it covers, so the result does not depend on the
number of threads or the chunk size.
"""

import collections
import concurrent.futures as cf
import functools
import os

import numpy as np

from simulator.errors import InputError

# Most threads per available core: beyond a few the threads only wait, while each
# holds blocks of normals drawn ahead (2 per thread, ~MB each) and chunks in flight.
THREADS_PER_CORE = 4


def available_cores():
    """Cores this process may run on (its affinity mask), at least 1."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def checked_workers(workers):
    """``workers`` threads for a record (default: every available core)."""
    if workers is None:
        return available_cores()
    if isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1:
        raise InputError(f"workers = {workers!r}; expected a positive number of threads")
    most = THREADS_PER_CORE * available_cores()
    if workers > most:
        raise InputError(f"workers = {workers!r} threads; expected at most {most} "
                         f"({THREADS_PER_CORE} per available core: more only hold more "
                         "blocks of random numbers in memory)")
    return int(workers)


class InlineExecutor:
    """An executor that runs each task at once on the calling thread (one worker)."""

    def submit(self, fn, *args):
        """Run ``fn(*args)`` now; return a finished future holding its result or error."""
        future = cf.Future()
        try:
            future.set_result(fn(*args))
        except BaseException as exc:  # handed to whoever asks for the result
            future.set_exception(exc)
        return future

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def executor(workers):
    """A thread pool of ``workers`` threads, or :class:`InlineExecutor` for one.

    The pool's threads keep the calling thread's priority. They used to run
    at a lower one (niceness +10), when drawing the normals took 2.5 times
    the recursion's time and kept every thread busy; with the drawing now
    cheaper than the recursion, a lowered pool only lost its core to other
    work on the machine. Measured on 2 cores with one other busy process
    (load average 2.2–2.6, 4·10⁷ iq samples, raw, 2 threads, alternate runs
    of 3 records each): niceness +10 gave 43–78 (median 47), +3 44–49, none
    48–77 (median 51 and 70 in two rounds) M samples/s, one thread 58–64.
    """
    if workers <= 1:
        return InlineExecutor()
    return cf.ThreadPoolExecutor(max_workers=workers, thread_name_prefix="record")


def writer(workers):
    """One thread that writes a record's chunks in order, or :class:`InlineExecutor` for a
    single-threaded record (the caller writes).

    It keeps the calling thread's priority: it works in short bursts, and
    every chunk waits for it in order, so a writer kept off the cores stalls
    the recursion too. Measured on 2 cores with other work running (load
    average 9, 2·10⁷ iq samples, three runs each): a writer at niceness +10
    gave 13–21 M samples/s, at the caller's priority 17–30.
    """
    if workers <= 1:
        return InlineExecutor()
    return cf.ThreadPoolExecutor(max_workers=1, thread_name_prefix="record-writer")


class OrderedStage:
    """Runs ``fn`` on items in the pool; hands the results to ``deliver`` in order.

    At most ``depth`` items are in flight (memory stays bounded). The
    deliveries run one at a time, in order, so the consumer (a file) is
    touched by one thread at a time: on the caller's thread, or, given a
    ``writer`` (an executor of one thread), on that thread, so that the
    caller goes on with the next item while the last one is written.
    """

    def __init__(self, pool, fn, deliver, depth, writer=None):
        self.pool, self.fn, self.deliver, self.depth = pool, fn, deliver, max(1, int(depth))
        self.writer = writer
        self.queue = collections.deque()

    def _delivered(self, future):
        self.deliver(future.result())

    def put(self, *args):
        """Submit one item; deliver the oldest ones while more than ``depth`` wait."""
        future = self.pool.submit(self.fn, *args)
        if self.writer is not None:  # the writer waits for the item, in order
            future = self.writer.submit(self._delivered, future)
        self.queue.append(future)
        while len(self.queue) > self.depth:
            self._finish(self.queue.popleft())

    def _finish(self, future):
        if self.writer is None:
            self.deliver(future.result())
        else:
            future.result()  # raises what the delivery raised

    def drain(self):
        """Deliver everything still in flight, in order."""
        while self.queue:
            self._finish(self.queue.popleft())

    def cancel(self):
        """Drop what has not started (after an error); wait for a delivery under way."""
        while self.queue:
            future = self.queue.popleft()
            if not future.cancel() and self.writer is not None:
                cf.wait([future])


def block_generator(seed, stream, index):
    """The generator of block ``index`` of a stream: PCG64 seeded with
    SeedSequence(seed, spawn_key=(stream, index))."""
    seq = np.random.SeedSequence(seed, spawn_key=(stream, index))
    return np.random.Generator(np.random.PCG64(seq))


def draw_block(seed, stream, index, size, width):
    """Block ``index`` of a stream: (size, width) standard normals from its own generator.

    The values are exactly those of numpy's
    ``block_generator(seed, stream, index).standard_normal((size, width))``,
    drawn by a numba kernel (:func:`simulator.records.fused.fill_normals`)
    that runs the same ziggurat on the same PCG64 state about three times
    faster and releases the GIL, so blocks can be drawn on several threads
    at once with the same bits.
    """
    from simulator.records.fused import fill_normals

    if not compiled_normals_are_numpys():  # another numba or numpy: numpy's own loop
        return block_generator(seed, stream, index).standard_normal((size, width))
    out = np.empty((size, width))
    fill_normals(block_generator(seed, stream, index), out)
    return out


CHECK_DRAWS = 1 << 17  # normals compared once per process: ~30 in the ziggurat's tail


@functools.cache
def compiled_normals_are_numpys():
    """Whether numba's compiled normals equal numpy's Generator's, on one test block.

    Checked once per process, so that a numba or numpy whose algorithms
    differ (neither promises the other's values) makes records slower, never
    different: :func:`draw_block` then uses numpy's own loop.
    """
    from simulator.records.fused import fill_normals

    ours = np.empty((CHECK_DRAWS, 1))
    fill_normals(block_generator(0, 0, 0), ours)
    theirs = block_generator(0, 0, 0).standard_normal((CHECK_DRAWS, 1))
    return bool(np.array_equal(ours.view(np.int64), theirs.view(np.int64)))


class NormalBlocks:
    """Standard normals for samples [start, start + count), drawn by fixed-size block.

    Block k (samples k·size … (k+1)·size − 1) is drawn by its own generator
    (:func:`draw_block`), so the numbers of any sample depend only on (seed,
    stream, its index), not on how the samples are grouped into chunks, nor
    on which thread drew them. Given an ``executor`` (a thread
    pool), the next ``ahead`` blocks are drawn in the background while the
    caller works on the current one, never past sample ``total``; a block the
    pool has not started when the caller needs it is drawn by the caller.
    """

    def __init__(self, seed, stream, width, size, *, executor=None, ahead=0, total=None):
        self.seed, self.stream, self.width, self.size = seed, stream, width, size
        self.index, self.block = None, None
        self.executor, self.ahead, self.pending = executor, int(ahead), {}
        self.last = None if total is None else max(0, (int(total) - 1) // size)

    def _block(self, k):
        if k != self.index:
            if self.executor is None:
                self.block = draw_block(self.seed, self.stream, k, self.size, self.width)
            else:
                last = k + self.ahead if self.last is None else min(k + self.ahead, self.last)
                for j in range(k, max(k, last) + 1):
                    if j not in self.pending:
                        self.pending[j] = self.executor.submit(
                            draw_block, self.seed, self.stream, j, self.size, self.width)
                for j in [j for j in self.pending if j < k]:
                    self.pending.pop(j).cancel()
                future = self.pending.pop(k)
                # not started yet (the pool's threads are busy or kept off the cores by
                # other work): draw it here rather than wait; the same numbers
                self.block = (draw_block(self.seed, self.stream, k, self.size, self.width)
                              if future.cancel() else future.result())
            self.index = k
        return self.block

    def pieces(self, start, count):
        """Yield (position from ``start``, view of the normals) covering the range."""
        pos, end = start, start + count
        while pos < end:
            k, offset = divmod(pos, self.size)
            n = min(self.size - offset, end - pos)
            yield pos - start, self._block(k)[offset:offset + n]
            pos += n

    def take(self, start, count):
        """The normals of samples [start, start + count) as one (count, width) array."""
        out = np.empty((count, self.width))
        for pos, piece in self.pieces(start, count):
            out[pos:pos + len(piece)] = piece
        return out
