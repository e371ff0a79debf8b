"""`python -m wkbfit ...`: the wkbfit command line (see wkbfit.cli)."""
import sys

from .cli import main

sys.exit(main())
