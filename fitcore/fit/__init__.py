"""Fitting: settings, fold schemes, curve families, the compiled least-squares loops, scores,
selection, and the engine ``fit_batch`` with the ``Results`` it returns.

    engine      fit_batch: chunks of whole series through the stages
    chunk       one chunk's rows in fold order, price window, centred volume
    stages      after the families' fits: cells, reasons, plan price, revenue, influence
    families/   one module per curve family (poly, loglog, semilog) and their contract (base)
    folds       one class per fold scheme (k-fold, shuffled, time, leave-one-out); shuffle: the seeded order
    scores      held-out errors into CV MSE, SE, PRESS; the sums Q² and R² are judged by
    basis       window and mapping; the one polynomial evaluator and the one leverage; plain coefficients
    polyfit, kernels, lanes   the compiled least-squares fits of many series and folds at once
    loo         exact leave-one-out residuals from the hat matrix
    selection   the rule (one-se, lowest); reasons: why a candidate is unavailable
    settings    FitSettings; results: Results

May import: ``data`` and the shared modules (errors, compiled, arrays).
"""
