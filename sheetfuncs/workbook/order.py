"""Ordering helpers for the run: cycles among our cells, and a dependency order."""
from __future__ import annotations

import heapq
from typing import Any, Mapping


def _cycles(deps: list[set[int]]) -> list[list[int]]:
    """Strongly connected components that form cycles (Tarjan, iterative)."""
    index: dict[int, int] = {}
    low: dict[int, int] = {}
    stack: list[int] = []
    on: set[int] = set()
    out: list[list[int]] = []
    for root in range(len(deps)):
        if root in index:
            continue
        index[root] = low[root] = len(index)
        stack.append(root)
        on.add(root)
        work = [(root, iter(sorted(deps[root])))]
        while work:
            v, it = work[-1]
            for w in it:
                if w not in index:
                    index[w] = low[w] = len(index)
                    stack.append(w)
                    on.add(w)
                    work.append((w, iter(sorted(deps[w]))))
                    break
                if w in on:
                    low[v] = min(low[v], index[w])
            else:
                work.pop()
                if work:
                    u = work[-1][0]
                    low[u] = min(low[u], low[v])
                if low[v] == index[v]:
                    comp = []
                    while True:
                        w = stack.pop()
                        on.discard(w)
                        comp.append(w)
                        if w == v:
                            break
                    if len(comp) > 1 or v in deps[v]:
                        out.append(sorted(comp))
    return out


def _order(deps: list[set[int]], soft: list[set[int]], done: Mapping[int, Any]) -> list[int]:
    """Cells in an order that meets every ``deps`` edge and as many ``soft`` ones as it can;
    ties go to sheet order.  Cells in ``done`` are left out (they already failed)."""
    n = len(deps)
    need_h = [0] * n
    need_s = [0] * n
    rev_h: list[list[int]] = [[] for _ in range(n)]
    rev_s: list[list[int]] = [[] for _ in range(n)]
    for j in range(n):
        if j in done:
            continue
        for k in deps[j]:
            if k not in done:
                need_h[j] += 1
                rev_h[k].append(j)
        for k in soft[j]:
            if k not in done and k not in deps[j]:
                need_s[j] += 1
                rev_s[k].append(j)
    ready_all: list[int] = []       # hard and soft needs met
    ready_hard: list[int] = []      # hard needs met
    for j in range(n):
        if j not in done and need_h[j] == 0:
            heapq.heappush(ready_hard, j)
            if need_s[j] == 0:
                heapq.heappush(ready_all, j)
    placed = [False] * n
    order: list[int] = []
    while ready_all or ready_hard:
        j = heapq.heappop(ready_all) if ready_all else heapq.heappop(ready_hard)
        if placed[j]:
            continue
        placed[j] = True
        order.append(j)
        for k in rev_h[j]:
            need_h[k] -= 1
            if need_h[k] == 0:
                heapq.heappush(ready_hard, k)
                if need_s[k] == 0:
                    heapq.heappush(ready_all, k)
        for k in rev_s[j]:
            need_s[k] -= 1
            if need_s[k] == 0 and need_h[k] == 0:
                heapq.heappush(ready_all, k)
    return order
