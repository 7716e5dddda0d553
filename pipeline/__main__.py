"""``python -m pipeline`` runs the ``statherm`` command line."""

import sys

from pipeline.cli import main

sys.exit(main())
