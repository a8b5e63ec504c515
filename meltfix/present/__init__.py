"""Layer 5, text for people on the plain command line: Rich tables of plans, odds, replays and
the cost report.

Imports the layers below it; the Textual screen (meltfix.tui) and the commands sit above.
"""
