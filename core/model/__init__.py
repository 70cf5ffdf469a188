"""Layer 2, the data model: Diagram, nodes, wires, parameters, requirements. Plain data changed
only through validating methods; no analysis."""
