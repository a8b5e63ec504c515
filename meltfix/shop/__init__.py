"""Layer 1, the shop's data and the metal's facts: elements, analyses, recipe books, heats, the
liquidus, the spectrometer's repeatability and how every number is written.

Imports only meltfix.base.
"""
