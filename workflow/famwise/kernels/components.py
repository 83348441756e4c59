"""Connected components of supra-threshold points on the product neighborhood.

Points are (channel, frequency, time), flattened in C order from
(n_channels, n_freqs, n_times). Point (c, f, t) touches (c, f +- 1, t) when
frequency is linked, (c, f, t +- 1) when time is linked, and (c', f, t) for
every neighbor c' of c in the channel graph (CSR ``indptr``, ``indices``)
when channels are linked. Positive and negative points never join.

Union-find with union by index order and path halving; one pass over the
points, linking each selected point to its already visited neighbors.

``tail_code``: 0 two-sided (points with stat > thr and stat < -thr),
1 greater (stat > thr only), 2 less (stat < -thr only).
"""

import numpy as np

from famwise.kernels._jit import jit, jit_parallel, prange


@jit
def _find(parent, p):
    """Root of ``p`` with path halving."""
    while parent[p] != p:
        parent[p] = parent[parent[p]]
        p = parent[p]
    return p


@jit
def _mark_signs(stat, threshold, tail_code, sign):
    """sign[p] = +1 / -1 for supra-threshold points of the allowed tails, else 0."""
    for p in range(stat.shape[0]):
        v = stat[p]
        s = 0
        if v > threshold and tail_code != 2:
            s = 1
        elif v < -threshold and tail_code != 1:
            s = -1
        sign[p] = s


@jit
def _drop_isolated(sign, kept, n_ch, n_ft, indptr, indices, min_neighbors):
    """kept = sign where at least ``min_neighbors`` neighbor channels share the sign at the same (f, t)."""
    for c in range(n_ch):
        for ft in range(n_ft):
            p = c * n_ft + ft
            s = sign[p]
            if s == 0:
                kept[p] = 0
                continue
            count = 0
            for k in range(indptr[c], indptr[c + 1]):
                if sign[indices[k] * n_ft + ft] == s:
                    count += 1
            kept[p] = s if count >= min_neighbors else 0


@jit
def _union_components(sign, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t, parent, selected):
    """Union-find over the signed points; returns their count n.

    selected[:n] lists the signed points in index order, and ``parent`` of
    each of them ends pointing at its component's root (other entries of
    ``parent`` are not touched).
    """
    n_ft = n_f * n_t
    n = 0
    for c in range(n_ch):
        for f in range(n_f):
            for t in range(n_t):
                p = (c * n_f + f) * n_t + t
                s = sign[p]
                if s == 0:
                    continue
                selected[n] = p
                n += 1
                parent[p] = p
                if link_t and t > 0 and sign[p - 1] == s:
                    _link(parent, p, p - 1)
                if link_f and f > 0 and sign[p - n_t] == s:
                    _link(parent, p, p - n_t)
                if link_ch:
                    for k in range(indptr[c], indptr[c + 1]):
                        c2 = indices[k]
                        if c2 < c:
                            q = p - (c - c2) * n_ft
                            if sign[q] == s:
                                _link(parent, p, q)
    for i in range(n):
        p = selected[i]
        parent[p] = _find(parent, p)
    return n


@jit
def _link(parent, p, q):
    """Join the components of p and q; the smaller root index becomes the root."""
    rp = _find(parent, p)
    rq = _find(parent, q)
    if rp < rq:
        parent[rq] = rp
    elif rq < rp:
        parent[rp] = rq


@jit
def _component_sums(stat, parent, selected, n, use_mass, acc):
    """acc[root] = cluster statistic (sum of |stat| or count), summed in point order; returns the largest."""
    for i in range(n):
        acc[parent[selected[i]]] = 0.0
    for i in range(n):
        p = selected[i]
        acc[parent[p]] += abs(stat[p]) if use_mass else 1.0
    best = 0.0
    for i in range(n):
        p = selected[i]
        if parent[p] == p and acc[p] > best:
            best = acc[p]
    return best


@jit
def _label_row(
    stat,
    threshold,
    tail_code,
    n_ch,
    n_f,
    n_t,
    indptr,
    indices,
    link_ch,
    link_f,
    link_t,
    use_mass,
    min_neighbors,
    sign,
    kept,
    parent,
    selected,
    acc,
):
    """Components of one map: fills parent (roots of the selected points) and acc; returns the largest
    cluster statistic."""
    _mark_signs(stat, threshold, tail_code, sign)
    if min_neighbors > 0:
        _drop_isolated(sign, kept, n_ch, n_f * n_t, indptr, indices, min_neighbors)
        sign = kept
    n = _union_components(sign, n_ch, n_f, n_t, indptr, indices, link_ch, link_f, link_t, parent, selected)
    return _component_sums(stat, parent, selected, n, use_mass, acc)


@jit_parallel
def _cluster_max_block(
    stats,
    threshold,
    tail_code,
    n_ch,
    n_f,
    n_t,
    indptr,
    indices,
    link_ch,
    link_f,
    link_t,
    use_mass,
    min_neighbors,
    n_chunks,
    signs,
    ints,
    accs,
    out,
):
    """Largest cluster statistic of each row of ``stats`` (n_rows, n_points) into ``out`` (n_rows,).

    The rows are split into ``n_chunks`` contiguous chunks run in parallel,
    chunk k on workspace k: ``signs`` int8 (n_chunks, 2, n_points),
    ``ints`` int32 (n_chunks, 2, n_points) and ``accs`` float64 (n_chunks,
    n_points); every row's result is independent of the split.
    """
    n_rows = stats.shape[0]
    for chunk in prange(n_chunks):
        for row in range(chunk * n_rows // n_chunks, (chunk + 1) * n_rows // n_chunks):
            out[row] = _label_row(
                stats[row],
                threshold,
                tail_code,
                n_ch,
                n_f,
                n_t,
                indptr,
                indices,
                link_ch,
                link_f,
                link_t,
                use_mass,
                min_neighbors,
                signs[chunk, 0],
                signs[chunk, 1],
                ints[chunk, 0],
                ints[chunk, 1],
                accs[chunk],
            )


@jit
def _cluster_roots(
    stat,
    threshold,
    tail_code,
    n_ch,
    n_f,
    n_t,
    indptr,
    indices,
    link_ch,
    link_f,
    link_t,
    use_mass,
    min_neighbors,
    parent,
    acc,
):
    """Components of one map, with the same arithmetic as ``_cluster_max_block``.

    Fills ``parent`` (root point index per point, -1 outside clusters) and ``acc``
    (cluster statistic at each root); returns the largest cluster statistic.
    """
    n_pts = stat.shape[0]
    sign = np.empty(n_pts, np.int8)
    kept = np.empty(n_pts, np.int8)
    selected = np.empty(n_pts, np.int32)
    parent[:] = -1
    return _label_row(
        stat,
        threshold,
        tail_code,
        n_ch,
        n_f,
        n_t,
        indptr,
        indices,
        link_ch,
        link_f,
        link_t,
        use_mass,
        min_neighbors,
        sign,
        kept,
        parent,
        selected,
        acc,
    )
