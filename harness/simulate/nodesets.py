"""Disjoint sets of node names (union-find with path halving), for this engine's graph work."""

from __future__ import annotations


def find_root(parent: dict, x):
    """The representative of ``x`` in ``parent`` (a dict of node -> parent; ``x`` joins as its
    own set when new), halving the path on the way (Tarjan's union-find)."""
    parent.setdefault(x, x)
    while parent[x] != x:
        parent[x] = parent[parent[x]]
        x = parent[x]
    return x
