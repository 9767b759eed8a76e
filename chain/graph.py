"""The few graph algorithms `chain` needs, on plain dicts and lists.

Connected components, reachability, one cycle, the elementary cycles of a
graph whose nodes have at most one predecessor each, and a topological
order by generations.  Textbook algorithms (depth- and breadth-first
search, Kahn's topological sort; from memory of Cormen, Leiserson, Rivest,
Stein, "Introduction to Algorithms", ch. 22).  Written here so that
``chain check`` does not import networkx (0.2-0.5 s of start-up) for graphs
of a few dozen nodes.  Every result follows the insertion order of the
nodes and edges given, so messages built from it are stable from run to run.
"""

from __future__ import annotations

from collections import deque
from typing import Hashable, Iterable

__all__ = ["Digraph", "components"]


def components(nodes: Iterable[Hashable], edges: Iterable[tuple[Hashable, Hashable]]) -> list[list]:
    """Connected components of the undirected graph, each in discovery order,
    the components in the order of their first node (nodes named only by an
    edge come after ``nodes``, in edge order)."""
    adj: dict = {n: [] for n in nodes}
    for a, b in edges:
        adj.setdefault(a, []).append(b)
        adj.setdefault(b, []).append(a)
    seen: set = set()
    out = []
    for start in adj:
        if start in seen:
            continue
        seen.add(start)
        group, queue = [start], deque([start])
        while queue:
            for nxt in adj[queue.popleft()]:
                if nxt not in seen:
                    seen.add(nxt)
                    group.append(nxt)
                    queue.append(nxt)
        out.append(group)
    return out


class Digraph:
    """A directed graph: nodes and successor lists in insertion order."""

    def __init__(self, nodes: Iterable[Hashable] = (), edges: Iterable[tuple[Hashable, Hashable]] = ()):
        self.succ: dict = {n: [] for n in nodes}
        for a, b in edges:
            self.add_edge(a, b)

    def add_edge(self, a: Hashable, b: Hashable) -> None:
        self.succ.setdefault(a, [])
        self.succ.setdefault(b, [])
        if b not in self.succ[a]:
            self.succ[a].append(b)

    def __contains__(self, node: Hashable) -> bool:
        return node in self.succ

    def descendants(self, start: Hashable) -> set:
        """Every node reachable from ``start`` (``start`` itself only through a cycle)."""
        seen: set = set()
        queue = deque(self.succ.get(start, ()))
        while queue:
            n = queue.popleft()
            if n not in seen:
                seen.add(n)
                queue.extend(self.succ[n])
        return seen

    def find_cycle(self) -> list[tuple] | None:
        """The edges of one cycle, found by depth-first search from the nodes in
        order, starting at the node the search returned to; None if acyclic."""
        state: dict = {}  # node → 1 on the current path, 2 finished
        for root in self.succ:
            if root in state:
                continue
            path = [root]
            state[root] = 1
            stack = [iter(self.succ[root])]
            while stack:
                nxt = next(stack[-1], None)
                if nxt is None:
                    state[path.pop()] = 2
                    stack.pop()
                elif state.get(nxt) == 1:
                    loop = path[path.index(nxt):]
                    return list(zip(loop, loop[1:] + loop[:1]))
                elif nxt not in state:
                    state[nxt] = 1
                    path.append(nxt)
                    stack.append(iter(self.succ[nxt]))
        return None

    def cycles(self) -> list[list]:
        """The elementary cycles, each as its nodes, when every node has at most
        one predecessor (so cycles are disjoint): found by walking back along
        the single predecessors (of a node with several, the first is followed)."""
        pred: dict = {}
        for a, nexts in self.succ.items():
            for b in nexts:
                pred.setdefault(b, a)
        found, done = [], set()
        for start in self.succ:
            walk, n = [], start
            while n in pred and n not in done and n not in walk:
                walk.append(n)
                n = pred[n]
            if n in walk:
                loop = walk[walk.index(n):]
                loop.reverse()
                found.append(loop)
            done.update(walk)
        return found

    def topological_order(self, within: set | None = None) -> list:
        """Nodes (of ``within``, if given) in generations: sources first, then
        what they feed, each generation in insertion order (Kahn)."""
        keep = self.succ.keys() if within is None else [n for n in self.succ if n in within]
        keep_set = set(keep)
        indegree = {n: 0 for n in keep}
        for a in keep:
            for b in self.succ[a]:
                if b in keep_set:
                    indegree[b] += 1
        generation = [n for n in keep if indegree[n] == 0]
        order = []
        while generation:
            order.extend(generation)
            nxt = []
            for n in generation:
                for b in self.succ[n]:
                    if b in keep_set:
                        indegree[b] -= 1
                        if indegree[b] == 0:
                            nxt.append(b)
            generation = nxt
        return order
