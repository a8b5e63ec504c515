"""Layer 0, the ground floor: errors that name file and field, safe output, where the data is, units.

Imports nothing else from meltfix.
"""
