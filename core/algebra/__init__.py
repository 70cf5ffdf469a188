"""Layer 1, exact algebra: the polynomial convention, the typed-text parser. Knows no diagram."""
