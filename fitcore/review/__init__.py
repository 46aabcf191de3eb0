"""Review: which series need a human. Flag thresholds, the flags of every series at once
(``diagnose``) and their sentences, influence of single observations, and one series' curves
and bands for charts.

May import: ``fit``, ``data`` and the shared modules.
"""
