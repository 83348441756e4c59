"""Threshold-free cluster enhancement via the component tree.

The signed points are swept in descending |stat| and added one by one to a
union-find forest on the product neighborhood (same neighborhood as
``famwise.kernels.components``; positive and negative points never join).
Adding the j-th point p (at level h_p) creates tree node j: the union of p
with the components of its already added same-sign neighbors, whose current
nodes end at h_p and become children of j. A node of extent s created at
level h_a and ended at level h_b (0 if it never ends) adds
s^E * (L(h_a) - L(h_b)) to every point below it in the tree, where L is the
integral of h^H. A point's TFCE is the sum along its path to the root: one
pass over the nodes in reverse creation order. Ties need no grouping: a node
superseded at its own level contributes exactly zero, so the order of equal
values does not change any result. The components are built once per map,
never once per level.

Memory layout, for speed: points keep the map's (channel, freq, time) order,
so the pass listing neighbors reads each neighbor direction as one
sequential stream. Every node array is indexed by sweep position (rank);
that pass lists, for each sweep position, the sweep positions of its
earlier same-sign neighbors, so the sweep itself reads its inputs in order.
The union-find keeps one int32 per node (parent, or minus the component
size at a root); a node stores only its parent node, since it ends at the
parent's level. Hot loops index with unsigned integers, which spares
numba's negative-index checks. Maps may be float64 or float32 (the same
values give the same result).

Exact mode: L(h) = h^(H+1) / (H+1); the values are ordered in linear time by
an LSD radix sort of the upper 32 bits of |stat| (monotone for positive
floats; all of a float32) packed with the point index, in as few passes of
at most 11 bits as cover the keys' span (three for most maps: small digits
keep the scatter in cache), then an insertion pass orders the rare equal
keys by the full value.
Fixed-step mode (step dh > 0): a point's level index is
k_p = max{k : k dh <= |stat|}; points with k_p = 0 are left out, and
L = G[k_p] with G[k] = sum_{j=1..k} (j dh)^H dh (right-endpoint rule); the
points are ordered by a counting sort on k_p.

References
----------
Smith SM, Nichols TE (2009). Threshold-free cluster enhancement: addressing
problems of smoothing, threshold dependence and localisation in cluster
inference. NeuroImage 44(1):83-98.
"""

import numpy as np
from llvmlite import ir

from famwise.kernels._jit import (
    JIT_DISABLED,
    cgutils,
    intrinsic,
    jit,
    jit_inline,
    jit_parallel,
    overload,
    prange,
    types,
)

PREFETCH_AHEAD = 16  # points ahead whose memory is requested early in the random-access passes
FIXED_SLOTS = 4  # neighbor slots the sweep always visits (most points have at most 4 earlier neighbors)
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


@jit
def _extent_power(size, E):
    """size ** E with fast paths for E = 0.5 and E = 1."""
    if E == 0.5:
        return np.sqrt(size)
    if E == 1.0:
        return float(size)
    return size**E


@jit
def _earlier_neighbors(rank, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t, nbr):
    """For each swept point (row = its sweep position j), its same-sign neighbors swept before it.

    ``nbr[j, 0]`` is their count and ``nbr[j, 1:]`` their sweep positions. One
    pass in memory order, so each neighbor direction is a sequential stream
    and the channel loop has the same length for a whole channel; no
    data-dependent branches (a candidate is always written and kept by
    advancing the count: rank r is an earlier same-sign neighbor of sweep
    position j when s r - 1 < j as unsigned; the candidate is stored as the
    int32 s r - 1, the same bits) and the rows of the coming
    points are prefetched. Negative offsets wrap around as unsigned
    integers; a missing freq neighbor reads the point itself, which is never
    earlier. The sweep then reads ``nbr`` in order.
    """
    n_ft = n_f * n_t
    n_pts = np.uint64(rank.shape[0])
    width = np.uint64(nbr.shape[1])
    rows = nbr.reshape(-1)
    one = np.uint64(1)
    offsets = np.zeros(indices.shape[0], np.uint64)  # channel neighbor k of channel c at point offset
    for c in range(n_ch):
        for k in range(indptr[c], indptr[c + 1]):
            offsets[k] = np.uint64((indices[k] - c) * n_ft)
    q = np.uint64(0)
    for c in range(n_ch):
        k0, k1 = (indptr[c], indptr[c + 1]) if link_ch else (0, 0)
        for f in range(n_f):
            down = np.uint64(n_t if link_f and f > 0 else 0)
            up = np.uint64(n_t if link_f and f < n_f - 1 else 0)
            for t in range(n_t):
                if q + np.uint64(PREFETCH_AHEAD) < n_pts:
                    ahead = abs(rank[q + np.uint64(PREFETCH_AHEAD)])
                    if ahead != 0:
                        _prefetch(rows, np.uint64(ahead - 1) * width)
                rq = rank[q]
                if rq != 0:
                    flip = rq >> np.int32(31)  # 0 or -1: (r ^ flip) - 1 - flip is s r - 1
                    back = np.int32(-1) - flip
                    j = np.uint32((rq ^ flip) + back)
                    row = np.uint64(j) * width + one
                    count = np.uint64(0)
                    if link_t and t > 0:
                        m = (rank[q - one] ^ flip) + back
                        rows[row + count] = m
                        count += np.uint64(np.uint32(m) < j)
                    if link_t and t < n_t - 1:
                        m = (rank[q + one] ^ flip) + back
                        rows[row + count] = m
                        count += np.uint64(np.uint32(m) < j)
                    m = (rank[q - down] ^ flip) + back
                    rows[row + count] = m
                    count += np.uint64(np.uint32(m) < j)
                    m = (rank[q + up] ^ flip) + back
                    rows[row + count] = m
                    count += np.uint64(np.uint32(m) < j)
                    for k in range(k0, k1):
                        m = (rank[q + offsets[k]] ^ flip) + back
                        rows[row + count] = m
                        count += np.uint64(np.uint32(m) < j)
                    rows[row - one] = count
                q += one


@jit_inline
def _find(par, x):
    """Root of ``x`` with path halving; ``par`` holds parents, and minus the size at roots."""
    while True:
        px = par[np.uint32(x)]
        if px < 0:
            return x
        ppx = par[np.uint32(px)]
        if ppx < 0:
            return px
        par[np.uint32(x)] = ppx
        x = ppx


@jit
def _sweep(order, n, rank, E, nbr, par, cur, npar, nsize, nlev, val, out):
    """Component-tree sweep; returns max |TFCE| and writes the signed map into ``out``
    when ``out`` has the points' length (points outside the sweep are left as they are).

    Arrays indexed by sweep position j: ``nbr`` (from ``_earlier_neighbors``),
    ``par`` (union-find parent, or minus the component size at a root),
    ``cur`` (a root's current node), ``npar`` (parent node, or -1: node j
    ends at the level of its parent), ``nsize``, ``nlev``, ``val`` (each
    node's cumulated TFCE). Point j joins the component of its first
    earlier neighbor, then those of the others; at least FIXED_SLOTS slots
    are visited (the last neighbor repeated: a no-op), so the loop length
    rarely varies.
    """
    for j in range(n):
        npar[j] = -1
        count = nbr[j, 0]
        if count == 0:
            par[j] = -1
            cur[j] = j
            nsize[j] = 1
            continue
        root = _find(par, nbr[j, 1])
        npar[np.uint32(cur[np.uint32(root)])] = j
        size = 1 - par[np.uint32(root)]
        for k in range(2, max(count, FIXED_SLOTS) + 1):
            r = _find(par, nbr[j, min(k, count)])
            if r == root:
                continue
            npar[np.uint32(cur[np.uint32(r)])] = j
            rs = -par[np.uint32(r)]
            if rs > size:
                par[np.uint32(root)] = r
                root = r
            else:
                par[np.uint32(r)] = root
            size += rs
        par[np.uint32(root)] = -size
        par[j] = root
        cur[np.uint32(root)] = j
        nsize[j] = size
    best = 0.0
    write = out.shape[0] == rank.shape[0]
    for j in range(n - 1, -1, -1):
        parent = npar[j]
        if parent >= 0:
            v = _extent_power(nsize[j], E) * (nlev[j] - nlev[np.uint32(parent)]) + val[np.uint32(parent)]
        else:
            v = _extent_power(nsize[j], E) * nlev[j]
        val[j] = v
        if v > best:
            best = v
        if write:
            q = np.uint32(order[j])
            out[q] = v if rank[q] > 0 else -v
    return best


@jit
def _tfce_row(
    stat,
    tail_code,
    E,
    H,
    step,
    n_ch,
    n_f,
    n_t,
    indptr,
    indices,
    link_ch,
    link_f,
    link_t,
    order,
    rank,
    nsize,
    par,
    cur,
    npar,
    nlev,
    val,
    buf,
    hist,
    nbr,
    out,
):
    """TFCE of one map (exact when step <= 0); returns max |TFCE|, fills ``out`` if it has the map's length."""
    n_sel, top, bottom = _scan(stat, tail_code)
    if out.shape[0] == stat.shape[0]:
        out[:] = 0.0
    if n_sel == 0:
        return 0.0
    if top == np.inf:  # no finite integral; the caller reports it
        return np.inf
    if step > 0.0:
        n = _order_steps(stat, tail_code, top, step, H, order, rank, nlev)
    else:
        n = _order_exact(stat, tail_code, bottom, top, H, order, rank, buf, hist, nlev)
    _earlier_neighbors(rank, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t, nbr)
    return _sweep(order, n, rank, E, nbr, par, cur, npar, nsize, nlev, val, out)


def _tfce_workspace(n_chunks, n_pts, indptr):
    """Scratch arrays for ``n_chunks`` threads (plain Python: allocate once, reuse for every block).

    Returns (i32, f64, buf, hist, nbr): per chunk the order, rank, node
    sizes, union-find parents, root nodes and node parents; node levels and
    node values; radix-sort entries; radix histograms; earlier-neighbor lists.
    """
    max_neighbors = 4 + int(np.max(np.diff(indptr), initial=0))
    return (
        np.empty((n_chunks, 6, n_pts), np.int32),
        np.empty((n_chunks, 2, n_pts), np.float64),
        np.empty((n_chunks, 2, n_pts), np.uint64),
        np.empty((n_chunks, 3, 1 << MAX_RADIX_BITS), np.int32),
        np.empty((n_chunks, n_pts, 1 + max_neighbors), np.int32),
    )


@jit
def _tfce_chunk_row(
    stat,
    tail_code,
    E,
    H,
    step,
    n_ch,
    n_f,
    n_t,
    indptr,
    indices,
    link_ch,
    link_f,
    link_t,
    chunk,
    i32,
    f64,
    buf,
    hist,
    nbr,
    out,
):
    """``_tfce_row`` on the workspace of one chunk."""
    return _tfce_row(
        stat,
        tail_code,
        E,
        H,
        step,
        n_ch,
        n_f,
        n_t,
        indptr,
        indices,
        link_ch,
        link_f,
        link_t,
        i32[chunk, 0],
        i32[chunk, 1],
        i32[chunk, 2],
        i32[chunk, 3],
        i32[chunk, 4],
        i32[chunk, 5],
        f64[chunk, 0],
        f64[chunk, 1],
        buf[chunk],
        hist[chunk],
        nbr[chunk],
        out,
    )


@jit_parallel
def _tfce_max_block(
    stats,
    tail_code,
    E,
    H,
    step,
    n_ch,
    n_f,
    n_t,
    indptr,
    indices,
    link_ch,
    link_f,
    link_t,
    n_chunks,
    i32,
    f64,
    buf,
    hist,
    nbr,
    out,
):
    """max |TFCE| of each row of ``stats`` (n_rows, n_points) into ``out`` (n_rows,); step <= 0 means exact.

    The rows are split into ``n_chunks`` contiguous chunks run in parallel,
    chunk k on workspace k (from ``_tfce_workspace``); every row's result is
    independent of the split.
    """
    n_rows = stats.shape[0]
    no_map = np.empty(0, np.float64)
    for chunk in prange(n_chunks):
        for row in range(chunk * n_rows // n_chunks, (chunk + 1) * n_rows // n_chunks):
            out[row] = _tfce_chunk_row(
                stats[row],
                tail_code,
                E,
                H,
                step,
                n_ch,
                n_f,
                n_t,
                indptr,
                indices,
                link_ch,
                link_f,
                link_t,
                chunk,
                i32,
                f64,
                buf,
                hist,
                nbr,
                no_map,
            )


@jit
def _tfce_map(
    stat, tail_code, E, H, step, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t, i32, f64, buf, hist, nbr, out
):
    """Signed TFCE of one map into ``out`` (n_points,) on workspace 0, same arithmetic as
    ``_tfce_max_block``; returns max |TFCE|."""
    return _tfce_chunk_row(
        stat,
        tail_code,
        E,
        H,
        step,
        n_ch,
        n_f,
        n_t,
        indptr,
        indices,
        link_ch,
        link_f,
        link_t,
        0,
        i32,
        f64,
        buf,
        hist,
        nbr,
        out,
    )
