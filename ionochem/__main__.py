"""``python -m ionochem`` runs the command line."""

import sys

if __name__ == "__main__":       # worker processes import this module again: do nothing there
    try:                         # Ctrl-C while the command line loads: one line, status 130
        from ionochem.cli import main
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        sys.exit(130)
    sys.exit(main())
