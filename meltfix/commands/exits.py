"""Exit status of ``meltfix`` (a contract scripts rely on)."""

EXIT_OK = 0
"""Every window met at the target odds."""
EXIT_BAD_INPUT = 2
"""Bad input: one line names the file and field."""
EXIT_CLOSEST = 3
"""No plan meets every window; the closest plan is shown."""
EXIT_SHORT = 4
"""Every window met on paper, but the odds fall short of the target."""
EXIT_INTERRUPTED = 130
"""Stopped by Ctrl+C (128 + SIGINT, as a shell reports it)."""
EXIT_PIPE_CLOSED = 141
"""The program reading the output closed it first (128 + SIGPIPE, as a shell reports it)."""
