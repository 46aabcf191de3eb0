"""Fitting: fit settings, fold layouts, the compiled least-squares loops, the curve families,
selection by cross-validation, prediction at a price, and the engine ``fit_batch`` with the
``Results`` it returns.

May import: ``data`` and the shared modules (errors, compiled, arrays).
"""
