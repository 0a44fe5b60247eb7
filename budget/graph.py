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
