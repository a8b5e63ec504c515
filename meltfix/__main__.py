"""`python -m meltfix`: the same program as the `meltfix` command."""

import sys

from meltfix.cli import program

if __name__ == "__main__":  # imported (the import-hygiene test imports every module), it runs nothing
    sys.exit(program())
