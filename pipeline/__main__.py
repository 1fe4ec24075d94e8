"""``python -m pipeline`` runs the ``orienteer`` command line."""

from pipeline.cli import entry

entry()
