"""Widgets of the trim screen, one area per module."""
