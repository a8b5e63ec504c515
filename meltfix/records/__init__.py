"""Layer 4, what the shop keeps: the logbook, recorded heats and their replay, the supervisor's
report, recoveries learnt from the logbook, the demo week.

Imports the layers below it, never the presentation, the screen or the commands.
"""
