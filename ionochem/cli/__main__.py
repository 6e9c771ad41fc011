"""``python -m ionochem.cli`` runs the command line."""

import sys

from ionochem.cli import main

sys.exit(main())
