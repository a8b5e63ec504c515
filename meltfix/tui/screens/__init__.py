"""Screens and dialogs, one per module.

Other screens plug in by module name (see ``meltfix.tui.app.EXTRA_SCREENS``): a module
``meltfix.tui.screens.<name>`` that defines ``make_screen(app) -> Screen`` is opened by its key.
"""
