"""One module per command of the plain command line (see meltfix.cli)."""
