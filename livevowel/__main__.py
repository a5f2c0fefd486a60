"""``python -m livevowel`` runs the command line."""

import sys

from livevowel.cli import main

sys.exit(main())
