"""``python -m app [PROJECT]`` and ``python -m app --screenshot OUT.png [PROJECT]``."""
import sys

from app.main import main

if __name__ == "__main__":  # analysis worker processes import this module too: they must not start a window
    sys.exit(main())
