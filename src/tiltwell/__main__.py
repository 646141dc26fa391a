"""``python -m tiltwell`` is the same command as ``tiltwell``."""

import sys

from .cli import main

if __name__ == "__main__":
    sys.exit(main())
