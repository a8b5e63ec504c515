"""Exit status of ``meltfix`` (a contract scripts rely on)."""

EXIT_OK = 0
"""Every window met at the target odds."""
EXIT_BAD_INPUT = 2
"""Bad input: one line names the file and field."""
EXIT_CLOSEST = 3
"""No plan meets every window; the closest plan is shown."""
EXIT_SHORT = 4
"""Every window met on paper, but the odds fall short of the target."""
