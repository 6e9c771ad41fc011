"""``python -m ionochem.cli`` runs the command line."""

import sys

from ionochem.cli import main

if __name__ == "__main__":       # worker processes import this module again: do nothing there
    sys.exit(main())
