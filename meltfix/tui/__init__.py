"""The terminal screen (Textual). Only this package imports Textual; the core never does."""
