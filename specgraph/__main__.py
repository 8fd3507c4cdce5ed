"""``python -m specgraph`` runs the command line."""

from .cli import run

run()
