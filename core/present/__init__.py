"""Layer 6, presentation: wording and number formats shared by the terminal text, the panels and
the HTML report; Routh array exports."""
