"""``python -m nullatlas.lookup`` runs the ``nullatlas`` command."""
from .cli import run

run()
