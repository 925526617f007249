"""``python -m nullatlas.lookup`` runs the ``nullatlas`` command."""
import sys

from .cli import main

sys.exit(main())
