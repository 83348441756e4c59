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

from famwise.kernels._jit import (
    jit,
    jit_inline,
    jit_parallel,
    prange,
)
from famwise.kernels.tfce_order import MAX_RADIX_BITS, PREFETCH_AHEAD, _order_exact, _order_steps, _prefetch, _scan

FIXED_SLOTS = 4  # neighbor slots the sweep always visits (most points have at most 4 earlier neighbors)


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
