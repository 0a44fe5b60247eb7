"""Small graph helpers shared by design validation and netlist flattening."""
from __future__ import annotations


def union_roots(n: int, pairs) -> list:
    """Root of every item 0..n-1 after joining each (a, b) pair; pairs with b < 0 (ground) are skipped."""
    parent = list(range(n))

    def find(x):
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    for a, b in pairs:
        if b >= 0:
            parent[find(a)] = find(b)
    return [find(i) for i in range(n)]


def reverse_cuthill_mckee(n: int, edges) -> list:
    """Reverse Cuthill-McKee order of nodes 0..n-1 of an undirected graph given as (a, b) edges.

    The ordering of E. Cuthill and J. McKee, "Reducing the bandwidth of sparse symmetric
    matrices", Proc. 24th ACM National Conference, 1969: breadth-first from each component's
    lowest-degree node, each level's new nodes by increasing degree, the whole order reversed.
    Ties are broken exactly as scipy.sparse.csgraph.reverse_cuthill_mckee breaks them (the
    seeds by numpy's argsort of int32 degrees, a node's neighbours in increasing number, a
    stable insertion sort by degree), so the elimination order, and with it every round-off
    of the DC solve, is the one scipy gives; tests/test_graph.py compares the two on random
    graphs.  Pure Python: it runs once per topology (budget.netlist caches it), and
    importing scipy.sparse cost 0.3 s of a fresh process's first call.
    """
    import numpy as np

    neighbours = [set() for _ in range(n)]
    for a, b in edges:
        neighbours[a].add(b)
        neighbours[b].add(a)
    for i in range(n):
        neighbours[i].add(i)            # the matrix's diagonal, as in the conductance matrix
    adj = [sorted(s) for s in neighbours]
    # degree = stored entries of the row, the diagonal counted twice (scipy's convention)
    degree = np.array([len(row) + 1 for row in adj], dtype=np.int32)
    seeds = np.argsort(degree).astype(np.int32)
    seed_pos = np.argsort(seeds).astype(np.int32)
    order: list = []
    for zz in range(n):
        if seeds[zz] == -1:
            continue
        seed = int(seeds[zz])
        order.append(seed)
        seeds[seed_pos[seed]] = -1
        start, end = len(order) - 1, len(order)
        while start < end:
            for level in range(start, end):
                first_new = len(order)
                for j in adj[order[level]]:
                    if seeds[seed_pos[j]] != -1:
                        seeds[seed_pos[j]] = -1
                        order.append(j)
                new = order[first_new:]
                # stable sort by degree (scipy: insertion sort of the level's new nodes)
                order[first_new:] = sorted(new, key=lambda v: int(degree[v]))
            start, end = end, len(order)
        if len(order) == n:
            break
    return order[::-1]
