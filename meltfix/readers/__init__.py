"""Layer 3, readers of other machines' files: spectrometer exports.

Imports meltfix.base, meltfix.shop and meltfix.plan.
"""
