"""budget.graph.reverse_cuthill_mckee against scipy.sparse.csgraph.reverse_cuthill_mckee.

scipy (a general-purpose library) is the outside reference: the order must be scipy's
exactly, ties included, because the DC solve's elimination order (and so its round-off)
follows it.
"""
from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import strategies as st
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import reverse_cuthill_mckee as scipy_rcm

from budget.graph import reverse_cuthill_mckee


def _scipy_order(n, edges):
    ra = [a for a, b in edges] + [b for a, b in edges] + list(range(n))
    rb = [b for a, b in edges] + [a for a, b in edges] + list(range(n))
    m = coo_matrix((np.ones(len(ra)), (ra, rb)), shape=(n, n)).tocsr()
    return list(scipy_rcm(m, symmetric_mode=True))


@st.composite
def graphs(draw):
    """Bus-like graphs: a trunk with stubs (a tree), extra loops, repeated edges, and
    several components (a DC-isolated segment)."""
    n = draw(st.integers(1, 80))
    edges = []
    for v in range(1, n):
        if draw(st.booleans()):
            edges.append((draw(st.integers(0, v - 1)), v))
    extra = draw(st.lists(st.tuples(st.integers(0, n - 1), st.integers(0, n - 1)), max_size=n))
    edges += [(a, b) for a, b in extra if a != b]
    return n, edges


@given(graphs())
def test_order_is_scipys_order(graph):
    n, edges = graph
    assert reverse_cuthill_mckee(n, edges) == _scipy_order(n, edges)


def test_large_graphs_with_many_degree_ties():
    """numpy's argsort takes other paths on long arrays; trunks of 1,000 nodes with stubs."""
    rng = np.random.default_rng(7)
    for n in (17, 64, 257, 1000, 2500):
        edges = [(v - 1 if rng.random() < 0.7 else int(rng.integers(0, v)), v) for v in range(1, n)]
        assert reverse_cuthill_mckee(n, edges) == _scipy_order(n, edges), n


def test_a_chain_numbered_at_random_gets_bandwidth_one():
    """The property the ordering is for: a trunk of n nodes, numbered at random, becomes a
    tridiagonal matrix (Cuthill and McKee 1969: a path has bandwidth 1)."""
    rng = np.random.default_rng(3)
    labels = rng.permutation(50)
    edges = [(int(labels[k]), int(labels[k + 1])) for k in range(49)]
    pos = {v: k for k, v in enumerate(reverse_cuthill_mckee(50, edges))}
    assert max(abs(pos[a] - pos[b]) for a, b in edges) == 1
