"""Layer 6, presentation: wording and number formats shared by the terminal text, the panels and
the HTML report; Routh array exports."""

MINUS = "\u2212"  # the true minus sign of every number shown to a reader (one definition)
