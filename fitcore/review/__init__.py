"""Review: which series need a human. Flag thresholds, the flags of every series at once
(``diagnose``) and their sentences, the number formats they and every screen share, influence of
single observations, and one series' curves and bands for charts.

May import: ``fit``, ``data`` and the shared modules.
"""
