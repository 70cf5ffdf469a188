"""``python -m core check ...``: see core.cli."""
import sys

from .cli import main

sys.exit(main())
