"""meltfix: plans ferroalloy, carbon and clean-scrap additions that bring a heat into its grade.

The package root is the pure core; the terminal screen lives in ``meltfix.tui`` and is never
imported from here.
"""

__version__ = "0.1.0"
