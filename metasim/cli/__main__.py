"""``python -m metasim.cli`` runs the metasim command."""

import sys

from metasim.cli import main

sys.exit(main())
