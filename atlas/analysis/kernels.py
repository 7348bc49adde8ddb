"""Compiled loops for the two passes of pruning, one group of characters at a time.

These are the inner loops of :mod:`atlas.analysis.likelihood` (the up pass, Felsenstein 1981,
J. Mol. Evol. 17:368-376) and of :mod:`atlas.analysis.sampling` (the down pass to the internal
nodes, Yang, Kumar & Nei 1995, Genetics 141:1641-1650), written as plain loops over nodes,
rate categories, states and characters and compiled by Numba. Arrays are laid out
``[node, category, state, char]`` as in :class:`atlas.analysis.likelihood.GroupPasses`.

Up pass, at each internal node ``v`` taken children first, for every category ``g``::

    m_e[a, c]  = sum_b P_e[g, a, b] D_e[g, b, c]              (message up branch e)
    prod[a, c] = prod over children e of v of m_e[a, c]
    s[c]       = max_a prod[a, c]  where that is below TINY (and positive), else 1
    D_v[g, a, c] = prod[a, c] / s[c],  L_v[g, c] = sum_e L_e[g, c] + log s[c]

(polytomies rescale the partial product the same way after every child from the third).

Down pass, at each child ``e`` of an internal node ``v`` taken parents first::

    b[a, c]    = A_v[g, a, c] * prod over the siblings s of e of m_s[a, c], rescaled to max 1
    A_e[g, b', c] = sum_a b[a, c] P_e[g, a, b'], rescaled to max 1

Why compiled: the vectorised NumPy passes spent most of their time gathering and scattering
rows by fancy indexing (``down[edges]``, ``down[parents] = ...``), which copies, and taking a
logarithm per node and character for the scale factors. Measured in one run on a random
400-tip tree with 300 characters (240 binary, 60 of three states; four rate categories), the
averaging over sampled trees (:func:`sample_tree`) went from 158 ms to 39 ms a tree, with the
same results to 3e-14.
"""

from __future__ import annotations

import numpy as np
from numba import njit

TINY = 1e-100  # the up pass rescales a node's column only when its largest value is below this


@njit(cache=True, nogil=True)
def up_pass(order, child_ptr, child_idx, p, down, log_scale, message, keep):  # pragma: no cover
    """Fill ``down`` and ``log_scale`` at the internal nodes in ``order`` (children first);
    ``down`` must hold the tips already and ``log_scale`` zeros there. With ``keep`` the
    message of every child branch goes into ``message``.

    Binary characters take a loop written out for two states, one pass over the characters
    per branch (3x faster than the loops for any number of states)."""
    if p.shape[2] == 2:
        _up_binary(order, child_ptr, child_idx, p, down, log_scale, message, keep)
    else:
        _up_any(order, child_ptr, child_idx, p, down, log_scale, message, keep)


@njit(cache=True, nogil=True)
def down_pass(order, child_ptr, child_idx, p, message, need, above):  # pragma: no cover
    """Fill ``above`` at every child marked in ``need`` of the marked internal nodes in
    ``order`` (parents first; ``above`` must hold the root already, and ``need`` every
    ancestor of a marked node), rescaled to a maximum of 1.

    A branch with exactly one sibling and two states takes one fused loop."""
    if p.shape[2] == 2:
        _down_binary(order, child_ptr, child_idx, p, message, need, above)
    else:
        _down_any(order, child_ptr, child_idx, p, message, need, above)


@njit(cache=True, nogil=True)
def _up_binary(order, child_ptr, child_idx, p, down, log_scale, message,
               keep):  # pragma: no cover
    n_cat = p.shape[1]
    n_chars = down.shape[3]
    scratch = np.empty((2, n_chars))
    top = np.empty(n_chars)
    for v in order:
        lo = child_ptr[v]
        hi = child_ptr[v + 1]
        for g in range(n_cat):
            dv0 = down[v, g, 0]
            dv1 = down[v, g, 1]
            lv = log_scale[v, g]
            for j in range(lo, hi):
                e = child_idx[j]
                p00 = p[e, g, 0, 0]
                p01 = p[e, g, 0, 1]
                p10 = p[e, g, 1, 0]
                p11 = p[e, g, 1, 1]
                d0 = down[e, g, 0]
                d1 = down[e, g, 1]
                le = log_scale[e, g]
                m = message[e, g] if keep else scratch
                m0 = m[0]
                m1 = m[1]
                if j == lo:
                    for c in range(n_chars):
                        x0 = d0[c]
                        x1 = d1[c]
                        a0 = p00 * x0 + p01 * x1
                        a1 = p10 * x0 + p11 * x1
                        m0[c] = a0
                        m1[c] = a1
                        dv0[c] = a0
                        dv1[c] = a1
                        lv[c] = le[c]
                else:
                    for c in range(n_chars):
                        x0 = d0[c]
                        x1 = d1[c]
                        a0 = p00 * x0 + p01 * x1
                        a1 = p10 * x0 + p11 * x1
                        m0[c] = a0
                        m1[c] = a1
                        dv0[c] *= a0
                        dv1[c] *= a1
                        lv[c] += le[c]
                    if j - lo >= 2:  # a polytomy: keep the partial product in range
                        _rescale_small(down[v, g], lv, top)
            _rescale_small(down[v, g], lv, top)


@njit(cache=True, nogil=True)
def _down_binary(order, child_ptr, child_idx, p, message, need, above):  # pragma: no cover
    n_cat = p.shape[1]
    n_chars = message.shape[3]
    for v in order:
        if not need[v]:
            continue
        lo = child_ptr[v]
        hi = child_ptr[v + 1]
        if hi - lo != 2:
            _down_any(np.array([v]), child_ptr, child_idx, p, message, need, above)
            continue
        for j in range(lo, hi):
            e = child_idx[j]
            if not need[e]:
                continue
            s = child_idx[lo + hi - 1 - j]  # the sibling
            for g in range(n_cat):
                a0 = above[v, g, 0]
                a1 = above[v, g, 1]
                s0 = message[s, g, 0]
                s1 = message[s, g, 1]
                o0 = above[e, g, 0]
                o1 = above[e, g, 1]
                p00 = p[e, g, 0, 0]
                p01 = p[e, g, 0, 1]
                p10 = p[e, g, 1, 0]
                p11 = p[e, g, 1, 1]
                for c in range(n_chars):
                    y0 = a0[c] * s0[c]  # at most 1, at least the smallest transition
                    y1 = a1[c] * s1[c]  # probability: no rescaling needed before P
                    z0 = y0 * p00 + y1 * p10
                    z1 = y0 * p01 + y1 * p11
                    t = max(z0, z1)
                    if t > 0.0:
                        z0 /= t
                        z1 /= t
                    o0[c] = z0
                    o1[c] = z1


@njit(cache=True, nogil=True)
def _up_any(order, child_ptr, child_idx, p, down, log_scale, message, keep):  # pragma: no cover
    """Fill ``down`` and ``log_scale`` at the internal nodes in ``order`` (children first);
    ``down`` must hold the tips already and ``log_scale`` zeros there. With ``keep`` the
    message of every child branch goes into ``message``."""
    n_cat = p.shape[1]
    k = p.shape[2]
    n_chars = down.shape[3]
    scratch = np.empty((k, n_chars))
    prod = np.empty((k, n_chars))
    acc = np.empty(n_chars)
    top = np.empty(n_chars)
    for v in order:
        for g in range(n_cat):
            factors = 0
            for j in range(child_ptr[v], child_ptr[v + 1]):
                e = child_idx[j]
                m = message[e, g] if keep else scratch
                for a in range(k):
                    _row_product(p[e, g, a], down[e, g], m[a])
                ls = log_scale[e, g]
                if factors == 0:
                    prod[:, :] = m
                    acc[:] = ls
                else:
                    for a in range(k):
                        _multiply(prod[a], m[a])
                    for c in range(n_chars):
                        acc[c] += ls[c]
                    if factors >= 2:  # a polytomy: keep the partial product in range
                        _rescale_small(prod, acc, top)
                factors += 1
            out = down[v, g]
            out[:, :] = prod
            _rescale_small(out, acc, top)
            log_scale[v, g] = acc


@njit(cache=True, nogil=True)
def _rescale_small(x, acc, top):  # pragma: no cover
    """Divide the columns of ``x`` (state, char) whose maximum over states is below
    :data:`TINY` (but positive) by that maximum, adding its log to ``acc``. Rescaling only
    there spares a logarithm per node and character (which took most of the up pass); a
    column of a binary node stays above ``TINY**2 * p_min**2``, far from underflow."""
    k, n_chars = x.shape
    top[:] = x[0]
    for a in range(1, k):
        xa = x[a]
        for c in range(n_chars):
            top[c] = max(top[c], xa[c])
    for c in range(n_chars):
        t = top[c]
        if 0.0 < t < TINY:
            for a in range(k):
                x[a, c] /= t
            acc[c] += np.log(t)


@njit(cache=True, nogil=True, inline="always")
def _row_product(weights, rows, out):  # pragma: no cover
    """``out[c] = sum_b weights[b] rows[b, c]``."""
    w0 = weights[0]
    r0 = rows[0]
    for c in range(out.size):
        out[c] = w0 * r0[c]
    for b in range(1, weights.size):
        w = weights[b]
        r = rows[b]
        for c in range(out.size):
            out[c] += w * r[c]


@njit(cache=True, nogil=True, inline="always")
def _multiply(x, y):  # pragma: no cover
    for c in range(x.size):
        x[c] *= y[c]


@njit(cache=True, nogil=True)
def _down_any(order, child_ptr, child_idx, p, message, need, above):  # pragma: no cover
    """Fill ``above`` at every child marked in ``need`` of the marked internal nodes in
    ``order`` (parents first; ``above`` must hold the root already, and ``need`` every
    ancestor of a marked node), rescaled to a maximum of 1."""
    n_cat = p.shape[1]
    k = p.shape[2]
    n_chars = message.shape[3]
    b = np.empty((k, n_chars))
    top = np.empty(n_chars)
    pt = np.empty((k, k))
    for v in order:
        if not need[v]:
            continue
        lo = child_ptr[v]
        hi = child_ptr[v + 1]
        for j in range(lo, hi):
            e = child_idx[j]
            if not need[e]:
                continue
            for g in range(n_cat):
                b[:, :] = above[v, g]
                factors = 0
                for i in range(lo, hi):
                    if i != j:
                        ms = message[child_idx[i], g]
                        for a in range(k):
                            _multiply(b[a], ms[a])
                        factors += 1
                        if factors % 8 == 0:  # many siblings (a polytomy): avoid underflow
                            _rescale(b, top)
                _rescale(b, top)
                out = above[e, g]
                for a in range(k):  # the transpose: out[b'] = sum_a b[a] P[a, b']
                    for bb in range(k):
                        pt[bb, a] = p[e, g, a, bb]
                for bb in range(k):
                    _row_product(pt[bb], b, out[bb])
                _rescale(out, top)


@njit(cache=True, nogil=True)
def _rescale(x, top):  # pragma: no cover
    """Divide each column of ``x`` (state, char) by its maximum over states, if positive."""
    k, n_chars = x.shape
    top[:] = x[0]
    for a in range(1, k):
        xa = x[a]
        for c in range(n_chars):
            top[c] = max(top[c], xa[c])
    for c in range(n_chars):
        if top[c] <= 0.0:
            top[c] = 1.0
    for a in range(k):
        xa = x[a]
        for c in range(n_chars):
            xa[c] /= top[c]


@njit(cache=True, nogil=True)
def add_posteriors(above, down, cat_post, nodes, rows, total, c0):  # pragma: no cover
    """``total[rows[i], c0 + c, a] += sum_g w[g, c] A D / sum_b A D`` at node ``nodes[i]``, where
    ``A D = above[v, g, a, c] down[v, g, a, c]`` and ``w = cat_post`` (the marginal posterior
    of each state, averaged over rate categories by their posterior weights; ``nan`` weights
    count as 0)."""
    n_cat, k, n_chars = above.shape[1:]
    post = np.empty((k, n_chars))
    tot = np.empty(n_chars)
    w = np.where(np.isfinite(cat_post), cat_post, 0.0)
    for i in range(nodes.size):
        v = nodes[i]
        post[:, :] = 0.0
        for g in range(n_cat):
            x = above[v, g]
            y = down[v, g]
            tot[:] = 0.0
            for a in range(k):
                for c in range(n_chars):
                    tot[c] += x[a, c] * y[a, c]
            for c in range(n_chars):
                if tot[c] <= 0.0:
                    tot[c] = 1.0
            for a in range(k):
                for c in range(n_chars):
                    post[a, c] += w[g, c] * (x[a, c] * y[a, c] / tot[c])
        out = total[rows[i]]
        for c in range(n_chars):
            for a in range(k):
                out[c0 + c, a] += post[a, c]


BLOCK = 64  # characters per block: a block's arrays for a 2,000-node tree stay in the caches


@njit(cache=True, nogil=True)
def _fill_tips(tips, tip_taxon, tip_part, c0, down, log_scale):  # pragma: no cover
    n_cat, k, width = down.shape[1:]
    for t in range(tips.size):
        v = tips[t]
        for g in range(n_cat):
            for a in range(k):
                for c in range(width):
                    down[v, g, a, c] = tip_part[tip_taxon[t], a, c0 + c]
            for c in range(width):
                log_scale[v, g, c] = 0.0


@njit(cache=True, nogil=True)
def _root_logliks(down, log_scale, root, pi, out, c0):  # pragma: no cover
    """``out[g, c0 + c] = log sum_a pi[a] D_root[g, a, c] + L_root[g, c]`` (-inf if 0)."""
    n_cat, k, width = down.shape[1:]
    for g in range(n_cat):
        for c in range(width):
            s = 0.0
            for a in range(k):
                s += pi[a] * down[root, g, a, c]
            out[g, c0 + c] = (np.log(s) if s > 0.0 else -np.inf) + log_scale[root, g, c]


@njit(cache=True, nogil=True)
def root_logliks(order, child_ptr, child_idx, p, tips, tip_taxon, tip_part, root, pi,
                 block):  # pragma: no cover
    """Root log-likelihood per category and character, ``(n_cat, n_chars)``: the up pass
    (see the module docstring) over blocks of ``block`` characters, keeping no messages.
    ``n_chars`` must be a multiple of ``block`` (see :func:`padded`)."""
    n_nodes, n_cat, k = p.shape[:3]
    n_chars = tip_part.shape[2]
    if n_chars % block:
        raise ValueError("the characters must fill whole blocks")
    out = np.empty((n_cat, n_chars))
    down = np.empty((n_nodes, n_cat, k, block))
    log_scale = np.zeros((n_nodes, n_cat, block))
    message = np.empty((1, 1, 1, 1))
    for c0 in range(0, n_chars, block):
        _fill_tips(tips, tip_taxon, tip_part, c0, down, log_scale)
        up_pass(order, child_ptr, child_idx, p, down, log_scale, message, False)
        _root_logliks(down, log_scale, root, pi, out, c0)
    return out


@njit(cache=True, nogil=True)
def sample_tree(order, child_ptr, child_idx, p, tips, tip_taxon, tip_part, root, pi, need,
                nodes, rows, total, block):  # pragma: no cover
    """One sampled tree's share of the averaged reconstruction of one group of characters:
    ``total[rows[i], c, a] += P(state a at node nodes[i] | data)`` for every character ``c``,
    from the up pass, the down pass to the nodes marked in ``need`` and the marginal
    posterior (see :func:`add_posteriors`), block by block of ``block`` characters (``n_chars``
    a multiple of it, see :func:`padded`). The posterior weight of rate category ``g`` is
    ``exp(l_g - log sum_h exp(l_h))`` from the root log-likelihoods (equal prior weights;
    ``nan`` where the data are impossible, and then left out)."""
    n_nodes, n_cat, k = p.shape[:3]
    n_chars = tip_part.shape[2]
    if n_chars % block:
        raise ValueError("the characters must fill whole blocks")
    down = np.empty((n_nodes, n_cat, k, block))
    message = np.empty((n_nodes, n_cat, k, block))
    above = np.empty((n_nodes, n_cat, k, block))
    log_scale = np.zeros((n_nodes, n_cat, block))
    loglik = np.empty((n_cat, n_chars))
    cat_post = np.empty((n_cat, block))
    reverse = order[::-1].copy()
    for c0 in range(0, n_chars, block):
        _fill_tips(tips, tip_taxon, tip_part, c0, down, log_scale)
        up_pass(order, child_ptr, child_idx, p, down, log_scale, message, True)
        _root_logliks(down, log_scale, root, pi, loglik, c0)
        for c in range(block):
            top = -np.inf
            for g in range(n_cat):
                if loglik[g, c0 + c] > top:
                    top = loglik[g, c0 + c]
            s = 0.0
            for g in range(n_cat):
                s += np.exp(loglik[g, c0 + c] - top)
            for g in range(n_cat):
                cat_post[g, c] = np.exp(loglik[g, c0 + c] - top) / s
        for g in range(n_cat):
            for a in range(k):
                for c in range(block):
                    above[root, g, a, c] = pi[a]
        down_pass(reverse, child_ptr, child_idx, p, message, need, above)
        add_posteriors(above, down, cat_post, nodes, rows, total, c0)


def padded(tip_part: np.ndarray, block: int = BLOCK) -> np.ndarray:
    """``tip_part`` ``(n_taxa, k, n_chars)`` widened with missing-data columns (all ones) to a
    multiple of ``block`` characters, contiguous."""
    n_taxa, k, n_chars = tip_part.shape
    width = -(-n_chars // block) * block
    out = np.ones((n_taxa, k, width))
    out[:, :, :n_chars] = tip_part
    return out


@njit(cache=True, nogil=True)
def mantel_hits(perms, x, z, r):  # pragma: no cover
    """How many relabellings ``p`` (rows of ``perms``) reach ``sum_{i<j} x[i, j] z[p_i, p_j]
    >= r - 1e-12`` (the Mantel statistic of the permuted second matrix; ``x`` holds the
    standardised first matrix above its diagonal). Row by row of ``z`` so that every read
    stays in one row: 15.7 s -> 2.6 s for 999 permutations of 1,000 objects (NumPy gathers
    against this kernel, with the first matrix placed once for all chunks)."""
    n = x.shape[0]
    hits = 0
    for t in range(perms.shape[0]):
        p = perms[t]
        s = 0.0
        for i in range(n - 1):
            row = z[p[i]]
            xi = x[i]
            for j in range(i + 1, n):
                s += xi[j] * row[p[j]]
        if s >= r - 1e-12:
            hits += 1
    return hits
