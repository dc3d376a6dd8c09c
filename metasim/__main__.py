"""``python -m metasim`` runs the metasim command."""

import sys

from metasim.cli import main

sys.exit(main())
