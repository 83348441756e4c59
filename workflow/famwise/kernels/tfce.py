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
superseded at its own level contributes exactly zero. The components are
built once per map, never once per level.

Memory layout, for speed: points are held in (freq, time, channel) order so
that a point's neighbor channels sit next to it; every node array is indexed
by sweep position (rank), and a pass in memory order first lists, for each
sweep position, the sweep positions of its earlier same-sign neighbors, so
the sweep itself reads its inputs in order.

Exact mode: L(h) = h^(H+1) / (H+1); the values are ordered in linear time by
a two-pass LSD radix sort of the upper 32 bits of the float64 |stat|
(monotone for positive floats), then an insertion pass orders the rare equal
keys by the full value. Fixed-step mode (step dh > 0): a point's level index
is k_p = max{k : k dh <= |stat|}; points with k_p = 0 are left out, and
L = G[k_p] with G[k] = sum_{j=1..k} (j dh)^H dh (right-endpoint rule); the
points are ordered by a counting sort on k_p.

References
----------
Smith SM, Nichols TE (2009). Threshold-free cluster enhancement: addressing
problems of smoothing, threshold dependence and localisation in cluster
inference. NeuroImage 44(1):83-98.
"""

import numba as nb
import numpy as np
from llvmlite import ir
from numba import types
from numba.core import cgutils
from numba.extending import intrinsic

PREFETCH_AHEAD = 16  # points ahead whose memory is requested early in the random-access passes


if nb.config.DISABLE_JIT:
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
                builder.module, ir.FunctionType(ir.VoidType(), [ir.IntType(8).as_pointer(), i32, i32, i32]),
                "llvm.prefetch.p0i8")
            builder.call(function, [address, ir.Constant(i32, 1), ir.Constant(i32, 3), ir.Constant(i32, 1)])
            return context.get_dummy_value()

        return types.void(arr, index), codegen


@nb.njit(cache=True, nogil=True)
def _find(rec, p):
    """Root of ``p`` with path halving in the union-find column ``rec[:, 0]``."""
    while rec[p, 0] != p:
        rec[p, 0] = rec[rec[p, 0], 0]
        p = rec[p, 0]
    return p


@nb.njit(cache=True, nogil=True)
def _mark(stat, tail_code, n_ch, n_ft, sign, absval):
    """sign in {+1, -1, 0} by tail and absval = |stat| (0 where unsigned), in point-major layout.

    ``stat`` is (channel, freq, time) flattened; ``sign`` and ``absval`` are
    indexed by the internal index (f * n_t + t) * n_ch + c, which puts a
    point's neighbor channels next to it in memory. Returns (number of signed
    points, max |stat|).
    """
    n = 0
    top = 0.0
    for q in range(stat.shape[0]):
        c = q // n_ft
        p = (q - c * n_ft) * n_ch + c
        v = stat[q]
        s = 0
        if v > 0.0 and tail_code != 2:
            s = 1
        elif v < 0.0 and tail_code != 1:
            s = -1
        sign[p] = s
        a = abs(v) if s != 0 else 0.0
        absval[p] = a
        if s != 0:
            n += 1
            if a > top:
                top = a
    return n, top


@nb.njit(cache=True, nogil=True)
def _order_exact(sign, absval, H, order, rank, keys, tmp_keys, hist, nlev):
    """Sweep order (descending |stat|) of the signed points.

    Fills order[:n] (ascending |stat|, the sweep reads it backwards),
    rank[p] = sign * (sweep position + 1) (0 for unsigned points) and
    nlev[j] = |stat|^(H+1)/(H+1) at sweep position j. Returns n. ``rank``
    doubles as scratch during the sort.
    """
    bits = absval.view(np.uint64)
    hist[:] = 0
    n = 0
    for p in range(sign.shape[0]):
        if sign[p] != 0:
            key = np.uint32(bits[p] >> np.uint64(32))
            keys[n] = key
            rank[n] = p
            hist[0, key & np.uint32(0xFFFF)] += 1
            hist[1, key >> np.uint32(16)] += 1
            n += 1
    for d in range(2):
        total = 0
        for b in range(65536):
            c = hist[d, b]
            hist[d, b] = total
            total += c
    for i in range(n):  # pass 1: low 16 bits, (keys, rank) -> (tmp_keys, order)
        key = keys[i]
        b = key & np.uint32(0xFFFF)
        j = hist[0, b]
        hist[0, b] = j + 1
        order[j] = rank[i]
        tmp_keys[j] = key
    for i in range(n):  # pass 2: high 16 bits, order -> rank
        b = tmp_keys[i] >> np.uint32(16)
        j = hist[1, b]
        hist[1, b] = j + 1
        rank[j] = order[i]
    for i in range(n):  # insertion pass: equal upper keys ordered by the full value, rank -> order
        if i + PREFETCH_AHEAD < n:
            _prefetch(absval, rank[i + PREFETCH_AHEAD])
        p = rank[i]
        a = absval[p]
        j = i
        while j > 0 and absval[order[j - 1]] > a:
            order[j] = order[j - 1]
            j -= 1
        order[j] = p
    for p in range(sign.shape[0]):
        if sign[p] == 0:
            rank[p] = 0
    for j in range(n):
        if j + PREFETCH_AHEAD < n:
            _prefetch(rank, order[n - 1 - j - PREFETCH_AHEAD])
            _prefetch(absval, order[n - 1 - j - PREFETCH_AHEAD])
        p = order[n - 1 - j]
        rank[p] = j + 1 if sign[p] > 0 else -(j + 1)
        a = absval[p]
        nlev[j] = a * a * a / 3.0 if H == 2.0 else a ** (H + 1.0) / (H + 1.0)
    return n


@nb.njit(cache=True, nogil=True)
def _order_steps(sign, absval, top, step, H, order, rank, nlev):
    """Sweep order of the points with level index k_p >= 1 (counting sort on k_p).

    Points with k_p = 0 get sign 0. Fills order[:n] (ascending k_p; within a
    level in memory order), rank[p] = sign * (sweep position + 1) (0 for
    points left out) and nlev[j] = G[k_p] at sweep position j. Returns n.
    """
    k_max = int(top / step) + 1
    g = np.empty(k_max + 1, np.float64)
    g[0] = 0.0
    for k in range(1, k_max + 1):
        h = k * step
        g[k] = g[k - 1] + (h * h if H == 2.0 else h ** H) * step
    start = np.zeros(k_max + 2, np.int64)
    for p in range(sign.shape[0]):
        if sign[p] == 0:
            rank[p] = 0
            continue
        a = absval[p]
        k = min(int(a / step), k_max)
        while k < k_max and (k + 1) * step <= a:
            k += 1
        while k > 0 and k * step > a:
            k -= 1
        if k == 0:
            sign[p] = 0
            rank[p] = 0
            continue
        rank[p] = k
        start[k + 1] += 1
    for k in range(2, k_max + 2):
        start[k] += start[k - 1]
    n = start[k_max + 1]
    for p in range(sign.shape[0]):
        if sign[p] != 0:
            k = rank[p]
            i = start[k]
            start[k] = i + 1
            order[i] = p
            rank[p] = n - i if sign[p] > 0 else i - n
            nlev[n - 1 - i] = g[k]
    return n


@nb.njit(cache=True, nogil=True)
def _extent_power(size, E):
    """size ** E with fast paths for E = 0.5 and E = 1."""
    if E == 0.5:
        return np.sqrt(size)
    if E == 1.0:
        return float(size)
    return size ** E


@nb.njit(cache=True, nogil=True)
def _earlier_neighbors(rank, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t, nbr):
    """For each swept point (row = its sweep position j), its same-sign neighbors swept before it.

    ``nbr[j, 0]`` is their count and ``nbr[j, 1:]`` their sweep positions. One
    pass in memory order, without data-dependent branches (a candidate is
    always written and kept by advancing the count) and with the rows of the
    coming points prefetched; the sweep then reads ``nbr`` in order.
    """
    n_tc = n_t * n_ch
    n_pts = rank.shape[0]
    width = nbr.shape[1]
    rows = nbr.reshape(-1)
    p = 0
    for f in range(n_f):
        for t in range(n_t):
            for c in range(n_ch):
                if p + PREFETCH_AHEAD < n_pts:
                    ahead = abs(rank[p + PREFETCH_AHEAD])
                    if ahead != 0:
                        _prefetch(rows, (ahead - 1) * width)
                rp = rank[p]
                if rp != 0:
                    s = 1 if rp > 0 else -1
                    j = rp * s - 1
                    count = 0
                    if link_t and t > 0:
                        rq = rank[p - n_ch] * s
                        nbr[j, count + 1] = rq - 1
                        count += (rq >= 1) & (rq <= j)
                    if link_t and t < n_t - 1:
                        rq = rank[p + n_ch] * s
                        nbr[j, count + 1] = rq - 1
                        count += (rq >= 1) & (rq <= j)
                    if link_f and f > 0:
                        rq = rank[p - n_tc] * s
                        nbr[j, count + 1] = rq - 1
                        count += (rq >= 1) & (rq <= j)
                    if link_f and f < n_f - 1:
                        rq = rank[p + n_tc] * s
                        nbr[j, count + 1] = rq - 1
                        count += (rq >= 1) & (rq <= j)
                    if link_ch:
                        for k in range(indptr[c], indptr[c + 1]):
                            rq = rank[p + indices[k] - c] * s
                            nbr[j, count + 1] = rq - 1
                            count += (rq >= 1) & (rq <= j)
                    nbr[j, 0] = count
                p += 1


@nb.njit(cache=True, nogil=True)
def _sweep(order, n, rank, n_ch, n_f, n_t, E, nbr, rec, ndat, nsize, nlev, out):
    """Component-tree sweep; returns max |TFCE| and writes the signed map into ``out``
    when ``out`` has the points' length (points outside the sweep are left as they are).

    Arrays indexed by sweep position j: ``nbr`` (from ``_earlier_neighbors``),
    ``rec[j]`` = (union-find parent, component size, current node) for
    union-find roots, ``ndat[j]`` = (level where node j ends, parent node or
    -1), ``nsize``, ``nlev``. ``ndat[:, 0]`` ends holding each node's
    cumulated TFCE.
    """
    for j in range(n):
        hp = nlev[j]
        rec[j, 0] = j
        ndat[j, 0] = 0.0
        ndat[j, 1] = -1.0
        root = j
        size = 1
        for k in range(1, nbr[j, 0] + 1):
            r = _find(rec, nbr[j, k])
            if r == root:
                continue
            o = rec[r, 2]
            ndat[o, 0] = hp
            ndat[o, 1] = j
            rs = rec[r, 1]
            if rs > size:
                rec[root, 0] = r
                root = r
            else:
                rec[r, 0] = root
            size += rs
        rec[root, 1] = size
        rec[root, 2] = j
        nsize[j] = size
    best = 0.0
    write = out.shape[0] == rank.shape[0]
    for j in range(n - 1, -1, -1):
        v = _extent_power(nsize[j], E) * (nlev[j] - ndat[j, 0])
        parent = int(ndat[j, 1])
        if parent >= 0:
            v += ndat[parent, 0]
        ndat[j, 0] = v
        if v > best:
            best = v
        if write:
            p = order[n - 1 - j]
            ft = p // n_ch
            c = p - ft * n_ch
            out[c * n_f * n_t + ft] = v if rank[p] > 0 else -v
    return best


@nb.njit(cache=True, nogil=True)
def _tfce_row(stat, tail_code, E, H, step, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t,
              sign, absval, order, rank, keys, tmp_keys, hist, nbr, rec, ndat, nsize, nlev, out):
    """TFCE of one map (exact when step <= 0); returns max |TFCE|, fills ``out`` if it has the map's length."""
    n_sel, top = _mark(stat, tail_code, n_ch, n_f * n_t, sign, absval)
    if out.shape[0] == stat.shape[0]:
        out[:] = 0.0
    if n_sel == 0:
        return 0.0
    if top == np.inf:  # no finite integral; the caller reports it
        return np.inf
    if step > 0.0:
        n = _order_steps(sign, absval, top, step, H, order, rank, nlev)
    else:
        n = _order_exact(sign, absval, H, order, rank, keys, tmp_keys, hist, nlev)
    _earlier_neighbors(rank, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t, nbr)
    return _sweep(order, n, rank, n_ch, n_f, n_t, E, nbr, rec, ndat, nsize, nlev, out)


def _tfce_workspace(n_chunks, n_pts, indptr):
    """Scratch arrays for ``n_chunks`` threads (plain Python: allocate once, reuse for every block).

    Returns (i8, f64, i32, u32, hist, nbr, rec, ndat): per chunk the point
    signs; |stat| and node levels; order, rank and node sizes; radix keys;
    radix histograms; earlier-neighbor lists; union-find records; node ends
    and parents.
    """
    max_neighbors = 4 + int(np.max(np.diff(indptr), initial=0))
    return (np.empty((n_chunks, n_pts), np.int8), np.empty((n_chunks, 2, n_pts), np.float64),
            np.empty((n_chunks, 3, n_pts), np.int32), np.empty((n_chunks, 2, n_pts), np.uint32),
            np.empty((n_chunks, 2, 65536), np.int32), np.empty((n_chunks, n_pts, 1 + max_neighbors), np.int32),
            np.empty((n_chunks, n_pts, 4), np.int32), np.empty((n_chunks, n_pts, 2), np.float64))


@nb.njit(cache=True, nogil=True)
def _tfce_chunk_row(stat, tail_code, E, H, step, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t,
                    chunk, i8, f64, i32, u32, hist, nbr, rec, ndat, out):
    """``_tfce_row`` on the workspace of one chunk."""
    return _tfce_row(stat, tail_code, E, H, step, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t,
                     i8[chunk], f64[chunk, 0], i32[chunk, 0], i32[chunk, 1], u32[chunk, 0], u32[chunk, 1],
                     hist[chunk], nbr[chunk], rec[chunk], ndat[chunk], i32[chunk, 2], f64[chunk, 1], out)


@nb.njit(cache=True, parallel=True)
def _tfce_max_block(stats, tail_code, E, H, step, n_ch, n_f, n_t, indptr, indices, link_ch, link_f,
                    link_t, n_chunks, i8, f64, i32, u32, hist, nbr, rec, ndat, out):
    """max |TFCE| of each row of ``stats`` (n_rows, n_points) into ``out`` (n_rows,); step <= 0 means exact.

    The rows are split into ``n_chunks`` contiguous chunks run in parallel,
    chunk k on workspace k (from ``_tfce_workspace``); every row's result is
    independent of the split.
    """
    n_rows = stats.shape[0]
    no_map = np.empty(0, np.float64)
    for chunk in nb.prange(n_chunks):
        for row in range(chunk * n_rows // n_chunks, (chunk + 1) * n_rows // n_chunks):
            out[row] = _tfce_chunk_row(stats[row], tail_code, E, H, step, n_ch, n_f, n_t, indptr, indices,
                                       link_ch, link_f, link_t, chunk, i8, f64, i32, u32, hist, nbr, rec, ndat,
                                       no_map)


@nb.njit(cache=True)
def _tfce_map(stat, tail_code, E, H, step, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t,
              i8, f64, i32, u32, hist, nbr, rec, ndat, out):
    """Signed TFCE of one map into ``out`` (n_points,) on workspace 0, same arithmetic as
    ``_tfce_max_block``; returns max |TFCE|."""
    return _tfce_chunk_row(stat, tail_code, E, H, step, n_ch, n_f, n_t, indptr, indices, link_ch, link_f,
                           link_t, 0, i8, f64, i32, u32, hist, nbr, rec, ndat, out)
