"""``python -m ppp`` runs the command line."""
from .cli import run

run()
