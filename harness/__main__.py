"""``python -m harness`` runs the ``tauproof`` command."""

import sys

from .cli import main

sys.exit(main())
