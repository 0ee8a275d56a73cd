"""``python -m matgen`` runs the command line."""

import sys

from matgen.cli import main

sys.exit(main())
