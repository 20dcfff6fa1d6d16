"""`python -m ampmodel`: the same command line as the `ampmodel` script."""
import sys

from ampmodel.cli import main

sys.exit(main())
