"""``python -m pipeline`` runs the ``statherm`` command line."""

from pipeline.cli import run

run()
