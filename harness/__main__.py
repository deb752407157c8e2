"""``python -m harness`` runs the ``tauproof`` command."""

import sys

from .cli import command

sys.exit(command())
