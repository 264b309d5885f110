"""A small builder that realizations use to make graph nodes with readable names."""

from __future__ import annotations

from ..graph import Graph, Node

__all__ = ["Builder"]


class Builder:
    """Collects nodes in creation order; ``prefix`` makes section-local names."""

    def __init__(self, name: str):
        self.name = name
        self.nodes: list[Node] = []
        self.sections: list[str] = []

    def _add(self, node: Node) -> str:
        self.nodes.append(node)
        return node.name

    def input(self) -> str:
        return self._add(Node("x", "input"))

    def output(self, src: str) -> str:
        return self._add(Node("out", "output", (src,)))

    def delay(self, name: str, src: str | None, section: str = "") -> str:
        # ``src`` may be filled in later with :meth:`connect` (loops are built forward)
        return self._add(Node(name, "delay", (src,) if src else (), section=section))

    def connect(self, name: str, src: str):
        for i, n in enumerate(self.nodes):
            if n.name == name:
                self.nodes[i] = n.replace(inputs=(src,))
                return
        raise KeyError(name)

    def gain(self, name: str, src: str, c: float, group: str, section: str = "") -> str:
        return self._add(
            Node(name, "gain", (src,), coefficient=float(c), group=group, section=section)
        )

    def add(self, name: str, terms: list[tuple[int, str]], section: str = "") -> str:
        assert terms, name
        return self._add(
            Node(
                name,
                "add",
                tuple(t for _, t in terms),
                signs=tuple(s for s, _ in terms),
                section=section,
            )
        )

    def quantize(self, name: str, src: str, role: str, section: str = "") -> str:
        return self._add(Node(name, "quantize", (src,), role=role, section=section))

    def weighted_sum(
        self, name: str, terms: list[tuple[float, str, str]], group: str, section: str = ""
    ) -> str | None:
        """Sum of coefficient * signal, dropping exactly-zero coefficients.

        ``terms`` are ``(coefficient, signal, gain name)``. A coefficient of -1 is still
        a gain (the format pass and hardware treat it as a negation). Returns the add
        node, or the single product when only one term is left, or None when none is.
        """
        products = [
            (1, self.gain(gname, sig, c, group, section)) for c, sig, gname in terms if c != 0.0
        ]
        if not products:
            return None
        if len(products) == 1:
            return products[0][1]
        return self.add(name, products, section)

    def graph(self, form: str, section_form: str = "") -> Graph:
        return Graph(self.name, tuple(self.nodes), form, section_form, tuple(self.sections)).check()
