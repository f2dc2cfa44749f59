"""``python -m fieldenergy`` runs the command line."""

import sys

from fieldenergy.cli import main

sys.exit(main())
