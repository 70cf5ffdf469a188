"""Layer 5, analysis: Routh array, stable range, poles, time response, requirement verdicts,
the Report and the Qt-free pipeline shared by the command line, the app, the report and the bench."""
