"""The bipartite circuit graph: net nodes, device nodes, one edge per device terminal."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import networkx

    from drivelint.circuit.model import Circuit

NET = "net"
DEVICE = "device"


def net_node(name: str) -> tuple[str, str]:
    return (NET, name)


def device_node(name: str) -> tuple[str, str]:
    return (DEVICE, name)


def build_graph(circuit: Circuit) -> networkx.MultiGraph[Any]:
    """Nodes are ``("net", name)`` and ``("device", name)``; each edge's key is the pin role.

    Coupling elements (K) have no terminals and so no edges; a device with two pins on one
    net (a shorted part) gets two parallel edges.
    """
    import networkx

    graph: networkx.MultiGraph[Any] = networkx.MultiGraph()
    graph.add_nodes_from((net_node(n) for n in circuit.nets), bipartite=NET)
    graph.add_nodes_from(
        (device_node(d.name), {"bipartite": DEVICE, "kind": d.kind})
        for d in circuit.devices.values()
    )
    graph.add_edges_from(
        (device_node(d.name), net_node(net), role, {"pin": role})
        for d in circuit.devices.values()
        for role, net in d.pins
    )
    return graph
