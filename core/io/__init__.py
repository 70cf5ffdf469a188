"""Layer 3, files: strict JSON project files, migrations, atomic save, recovery files."""
