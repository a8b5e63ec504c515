"""Layer 2, the planning maths: the result types (``result``, no NumPy or solver), the mass balance,
the LP on HiGHS, the odds, deoxidation, treatment, order of additions, reasons, cautions and the hand
method.

Imports only meltfix.base and meltfix.shop. Kept empty so importing ``meltfix.plan.result`` loads no solver.
"""
