"""`python -m meltfix`: the same program as the `meltfix` command."""

import sys

from meltfix.cli import program

sys.exit(program())
