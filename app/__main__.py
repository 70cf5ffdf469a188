"""``python -m app [PROJECT]`` and ``python -m app --screenshot OUT.png [PROJECT]``."""
import sys

from app.main import main

sys.exit(main())
