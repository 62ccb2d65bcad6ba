"""Faster kernels that give the records exactly the bits of the plain ones.

Two costs dominate a streamed record (docs/records.md, "Speed and memory"):
drawing the normals and the sequential recursion. Both are cut here
without changing a single value:

- :func:`fill_normals` draws a block of standard normals with numba's
  compiled version of numpy's ``Generator.standard_normal`` on the block's
  own Generator: the same ziggurat on the same PCG64 state, so the same
  values in the same order, about three times faster than numpy's loop on
  the development machine and without the GIL. (Checked once per process,
  :func:`simulator.records.pipeline.compiled_normals_are_numpys`: with a
  numba or numpy whose algorithms differ, numpy's own loop draws.)
- :func:`modal_pair_step` runs the two-channel recursion in modal
  coordinates (iq and if records, :func:`simulator.records.kernels.modal_innovations_step`)
  with every rounding written out: each multiply-add that the compiler fused
  in the plain kernel (``fastmath``) is an explicit :func:`fma` here, in the
  same order, so the outputs are the same bits. Written out, the state of
  two modal coordinates (a cavity and one mechanical mode, the common case)
  stays in registers from sample to sample instead of memory, and an iq
  record is digitised in the same loop: the rounding and clipping run in the
  time the recursion waits for its own previous sample.

The plain kernel's loop over modes is vectorised by the compiler from
:data:`PAIR_MODES_MOST` + 1 coordinates on, which sums the modes' outputs in
another order; records with that many coordinates keep the plain kernel.
``tests/test_records_bits.py`` pins the bits of records made before these
kernels existed.
"""

import numba
import numpy as np
from numba.core import types
from numba.extending import intrinsic

# Modal coordinates up to which the plain kernel's loop over modes is compiled as a
# scalar loop on x86-64 (read from its machine code: the vectorised loop starts at 12),
# hence the sums whose order this kernel repeats.
PAIR_MODES_MOST = 11


@numba.njit(cache=True, nogil=True)
def fill_normals(generator, out):
    """Fill ``out`` (rows × columns, float64) with ``generator``'s standard normals, row by row.

    The values are those of ``generator.standard_normal(out.shape)``:
    numba compiles numpy's own algorithm (Marsaglia and Tsang's ziggurat as
    numpy's distributions implement it) on the Generator's bit generator.
    Checked on 5·10⁷ draws of several seeds on the development machine, and
    by ``tests/test_record_fused.py`` on every run of the suite.
    """
    for k in range(out.shape[0]):
        for i in range(out.shape[1]):
            out[k, i] = generator.standard_normal()


@intrinsic
def fma(typingctx, a, b, c):
    """a·b + c with one rounding (IEEE 754 fusedMultiplyAdd): the processor's FMA."""
    signature = types.float64(types.float64, types.float64, types.float64)

    def codegen(context, builder, sig, args):
        return builder.fma(*args)

    return signature, codegen


@numba.njit
def _level(value, scale, low, high):
    """(count, clipped) of one value: rint(value × scale), ties to even, clipped to
    [low, high], as :func:`simulator.records.kernels.digitise` makes it."""
    level = np.rint(value * scale)
    if level < low:
        return low, True
    if level > high:
        return high, True
    return level, False


@numba.njit
def _mode(sr, si, lam_re, lam_im, g0r, g0i, g1r, g1i, d0r, d1r, d0i, d1i, x0, x1, y0, y1):
    """One modal coordinate's step: its part of both outputs and its next value.

    y_c += Re[G_c m] and m ← λ m + D ξ, rounded as the plain kernel's compiled
    code rounds them.
    """
    y0 = fma(-si, g0i, fma(sr, g0r, y0))
    y1 = fma(-si, g1i, fma(sr, g1r, y1))
    new_re = fma(x1, d1r, fma(x0, d0r, fma(sr, lam_re, -(si * lam_im))))
    new_im = fma(x1, d1i, fma(x0, d0i, fma(sr, lam_im, si * lam_re)))
    return new_re, new_im, y0, y1


@numba.njit
def _emit(k, y0, y1, out, counts, scale, low, high):
    """Store sample k's outputs, or their counts; return 1 if a channel clipped."""
    if counts.shape[0] == 0:
        out[k, 0] = y0
        out[k, 1] = y1
        return 0
    c0, hit0 = _level(y0, scale, low, high)
    c1, hit1 = _level(y1, scale, low, high)
    counts[k, 0] = c0
    counts[k, 1] = c1
    return 1 if hit0 or hit1 else 0


@numba.njit(cache=True, nogil=True)
def modal_pair_step(lam_re, lam_im, out_re, out_im, drive_re, drive_im, innovation_factor,
                    state_re, state_im, normals, out, scale, low, high, counts):
    """The modal innovations recursion of two output channels, digitised on request.

    The arguments up to ``normals`` are those of
    :func:`simulator.records.kernels.modal_innovations_step` (p = 2, at most
    :data:`PAIR_MODES_MOST` coordinates). With ``counts`` empty (0 rows) the
    outputs go to ``out`` (count, 2) as there; otherwise they are digitised
    into ``counts`` (count, 2) like :func:`simulator.records.kernels.digitise`
    with ``scale``, ``low`` and ``high``, ``out`` is not touched, and the
    number of samples with a clipped channel is returned.
    """
    l00, l10, l11 = innovation_factor[0, 0], innovation_factor[1, 0], innovation_factor[1, 1]
    clipped = 0
    if lam_re.shape[0] == 2:  # a cavity and one mode: the state lives in registers
        a_re, a_im, b_re, b_im = lam_re[0], lam_im[0], lam_re[1], lam_im[1]
        sa_re, sa_im, sb_re, sb_im = state_re[0], state_im[0], state_re[1], state_im[1]
        for k in range(normals.shape[0]):
            x0 = normals[k, 0]
            x1 = normals[k, 1]
            y0 = l00 * x0
            y1 = fma(x1, l11, x0 * l10)
            sa_re, sa_im, y0, y1 = _mode(
                sa_re, sa_im, a_re, a_im, out_re[0, 0], out_im[0, 0], out_re[1, 0],
                out_im[1, 0], drive_re[0, 0], drive_re[0, 1], drive_im[0, 0], drive_im[0, 1],
                x0, x1, y0, y1)
            sb_re, sb_im, y0, y1 = _mode(
                sb_re, sb_im, b_re, b_im, out_re[0, 1], out_im[0, 1], out_re[1, 1],
                out_im[1, 1], drive_re[1, 0], drive_re[1, 1], drive_im[1, 0], drive_im[1, 1],
                x0, x1, y0, y1)
            clipped += _emit(k, y0, y1, out, counts, scale, low, high)
        state_re[0], state_im[0], state_re[1], state_im[1] = sa_re, sa_im, sb_re, sb_im
        return clipped
    for k in range(normals.shape[0]):
        x0 = normals[k, 0]
        x1 = normals[k, 1]
        y0 = l00 * x0
        y1 = fma(x1, l11, x0 * l10)
        for j in range(lam_re.shape[0]):
            state_re[j], state_im[j], y0, y1 = _mode(
                state_re[j], state_im[j], lam_re[j], lam_im[j], out_re[0, j], out_im[0, j],
                out_re[1, j], out_im[1, j], drive_re[j, 0], drive_re[j, 1], drive_im[j, 0],
                drive_im[j, 1], x0, x1, y0, y1)
        clipped += _emit(k, y0, y1, out, counts, scale, low, high)
    return clipped
