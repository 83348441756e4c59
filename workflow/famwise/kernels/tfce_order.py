"""The ordering half of the TFCE sweep: points ranked by height, by an exact radix sort or in fixed steps.

`famwise.kernels.tfce_sweep` visits the points in this order; the helpers here
(memory prefetch, float bits) serve both.
"""

import numpy as np
from llvmlite import ir

from famwise.kernels._jit import (
    JIT_DISABLED,
    cgutils,
    intrinsic,
    jit,
    jit_inline,
    overload,
    types,
)

PREFETCH_AHEAD = 16  # points ahead whose memory is requested early in the random-access passes
MAX_RADIX_BITS = 11  # most bits of the sort key per radix pass (three passes cover any 31-bit key)


if JIT_DISABLED:

    def _prefetch(arr, index):
        """No-op when kernels run as plain Python."""
else:

    @intrinsic
    def _prefetch(typingctx, arr, index):
        """Ask the CPU to bring ``arr[index]`` (1-D array) into cache for writing (LLVM prefetch)."""
        if not isinstance(arr, types.Array) or arr.ndim != 1 or not isinstance(index, types.Integer):
            return None

        def codegen(context, builder, signature, args):
            array = context.make_array(signature.args[0])(context, builder, args[0])
            address = builder.bitcast(builder.gep(array.data, [args[1]]), ir.IntType(8).as_pointer())
            i32 = ir.IntType(32)
            function = cgutils.get_or_insert_function(
                builder.module,
                ir.FunctionType(ir.VoidType(), [ir.IntType(8).as_pointer(), i32, i32, i32]),
                "llvm.prefetch.p0i8",
            )
            builder.call(function, [address, ir.Constant(i32, 1), ir.Constant(i32, 3), ir.Constant(i32, 1)])
            return context.get_dummy_value()

        return types.void(arr, index), codegen


if JIT_DISABLED:

    def _float32_from_bits(bits):
        """The float32 whose bits are ``bits`` (uint32)."""
        return np.uint32(bits).view(np.float32)
else:

    @intrinsic
    def _float32_from_bits(typingctx, bits):
        """The float32 whose bits are ``bits`` (uint32)."""
        if not isinstance(bits, types.Integer) or bits.bitwidth != 32:
            return None

        def codegen(context, builder, signature, args):
            return builder.bitcast(args[0], ir.FloatType())

        return types.float32(bits), codegen


@jit
def _signed(v, tail_code):
    """+1, -1 or 0: the sign under which value ``v`` is enhanced for the tail."""
    if v > 0.0 and tail_code != 2:
        return 1
    if v < 0.0 and tail_code != 1:
        return -1
    return 0


@jit
def _scan(stat, tail_code):
    """(number of signed points, max |stat| and min |stat| over them) as (int, float, float)."""
    n = 0
    top = 0.0
    bottom = np.inf
    for q in range(stat.shape[0]):
        v = stat[q]
        if _signed(v, tail_code) != 0:
            n += 1
            top = max(top, abs(v))
            bottom = min(bottom, abs(v))
    return n, float(top), float(bottom)


def _key_bits(stat):
    """(bits, shift): ``stat`` (float64 or float32) viewed as unsigned integers, and the right
    shift that keeps their upper 32 bits; for |v| these are monotone in the value."""
    if stat.dtype == np.float32:
        return stat.view(np.uint32), 0
    return stat.view(np.uint64), 32


@overload(_key_bits)
def _key_bits_jit(stat):
    """``_key_bits`` in jitted code (picks the view by dtype at compile time)."""
    if stat.dtype == types.float32:
        return lambda stat: (stat.view(np.uint32), 0)
    return lambda stat: (stat.view(np.uint64), 32)


@jit_inline
def _key(bits, shift, q):
    """Upper 32 bits of |stat[q]| (sign bit cleared) as uint64."""
    return (np.uint64(bits[q]) >> np.uint64(shift)) & np.uint64(0x7FFFFFFF)


@jit
def _order_exact(stat, tail_code, bottom, top, H, order, rank, buf, hist, nlev):
    """Sweep order (descending |stat|) of the signed points (|stat| between ``bottom`` and ``top``).

    Fills order[j] = point at sweep position j, rank[q] = sign * (sweep
    position + 1) (0 for unsigned points) and
    nlev[j] = |stat|^(H+1)/(H+1) at sweep position j. ``buf`` (2, n_points)
    holds the packed entries (key - lowest key) << 32 | point << 1 | negative,
    sorted on as few radix digits of at most MAX_RADIX_BITS bits as cover
    the keys' span. Returns n.
    """
    bits, shift = _key_bits(stat)
    ends = np.empty(2, stat.dtype)
    ends[0] = bottom
    ends[1] = top
    end_bits, _ = _key_bits(ends)
    lo = _key(end_bits, shift, 0)
    n_bits = 1
    while (_key(end_bits, shift, 1) - lo) >> np.uint64(n_bits) != 0:
        n_bits += 1
    n_pass = (n_bits + MAX_RADIX_BITS - 1) // MAX_RADIX_BITS
    width = (n_bits + n_pass - 1) // n_pass
    mask = np.uint64((1 << width) - 1)
    hist[:] = 0
    src = buf[0]
    n = 0
    for q in range(stat.shape[0]):
        s = _signed(stat[q], tail_code)
        if s == 0:
            rank[q] = 0
            continue
        x = ((_key(bits, shift, q) - lo) << np.uint64(32)) | np.uint64(2 * q + (s < 0))
        src[n] = x
        for d in range(n_pass):
            hist[d, (x >> np.uint64(32 + d * width)) & mask] += 1
        n += 1
    dst = buf[1]
    for d in range(n_pass):
        total = 0
        for b in range(1 << width):
            c = hist[d, b]
            hist[d, b] = total
            total += c
        digit = np.uint64(32 + d * width)
        for i in range(n):
            x = src[i]
            b = (x >> digit) & mask
            j = hist[d, b]
            hist[d, b] = j + 1
            dst[np.uint64(j)] = x
        src, dst = dst, src
    low = np.uint64(0xFFFFFFFF)
    for i in range(1, n):  # insertion pass: equal keys ordered by the full value (float64 only moves)
        x = src[i]
        key = x >> np.uint64(32)
        if src[i - 1] >> np.uint64(32) == key:
            a = abs(stat[(x & low) >> np.uint64(1)])
            j = i
            while j > 0 and src[j - 1] >> np.uint64(32) == key and abs(stat[(src[j - 1] & low) >> np.uint64(1)]) > a:
                src[j] = src[j - 1]
                j -= 1
            src[j] = x
    for j in range(n):
        if j + PREFETCH_AHEAD < n:
            ahead = (src[n - 1 - PREFETCH_AHEAD - j] & low) >> np.uint64(1)
            _prefetch(rank, ahead)
            if shift != 0:
                _prefetch(stat, ahead)
        x = src[n - 1 - j]
        q = (x & low) >> np.uint64(1)
        order[j] = q
        rank[q] = -(j + 1) if x & np.uint64(1) else j + 1
        if shift == 0:  # float32: the key is all of |stat|
            a = np.float64(_float32_from_bits(np.uint32((x >> np.uint64(32)) + lo)))
        else:
            a = np.float64(abs(stat[q]))
        nlev[j] = a * a * a / 3.0 if H == 2.0 else a ** (H + 1.0) / (H + 1.0)
    return n


@jit
def _order_steps(stat, tail_code, top, step, H, order, rank, nlev):
    """Sweep order of the points with level index k_p >= 1 (counting sort on k_p).

    Fills order[j] = point at sweep position j (descending k_p; within a
    level in memory order), rank[q] = sign * (sweep position + 1) (0 for
    points left out; ``rank`` doubles as scratch for the signed k_p) and
    nlev[j] = G[k_p] at sweep position j. Returns n.
    """
    k_max = int(top / step) + 1
    g = np.empty(k_max + 1, np.float64)
    g[0] = 0.0
    for k in range(1, k_max + 1):
        h = k * step
        g[k] = g[k - 1] + (h * h if H == 2.0 else h**H) * step
    start = np.zeros(k_max + 2, np.int64)
    inv_step = 1.0 / step
    for q in range(stat.shape[0]):
        v = stat[q]
        s = _signed(v, tail_code)
        if s == 0:
            rank[q] = 0
            continue
        a = abs(v)
        k = min(int(a * inv_step), k_max)  # a first guess, made exact below
        while k < k_max and (k + 1) * step <= a:
            k += 1
        while k > 0 and k * step > a:
            k -= 1
        rank[q] = s * k
        start[k_max - k + 1] += k > 0  # bucket k_max - k (levels descending); k = 0 is left out
    for k in range(2, k_max + 2):
        start[k] += start[k - 1]
    for q in range(stat.shape[0]):
        kq = rank[q]
        if kq != 0:
            k = abs(kq)
            j = start[k_max - k]
            start[k_max - k] = j + 1
            order[j] = q
            rank[q] = j + 1 if kq > 0 else -(j + 1)
            nlev[j] = g[k]
    return start[k_max]
