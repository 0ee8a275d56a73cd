"""``python -m matgen`` runs the command line."""

import sys

try:
    from matgen.cli import main
except KeyboardInterrupt:  # Ctrl-C while the command line itself is imported
    print("matgen: interrupted", file=sys.stderr)
    sys.exit(130)

sys.exit(main())
