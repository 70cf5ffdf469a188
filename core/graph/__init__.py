"""Layer 4, the diagram as a signal-flow graph: elimination, reduction to the characteristic
polynomial and transfer functions, Mason's formula as the independent check."""
