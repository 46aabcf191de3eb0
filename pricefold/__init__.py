"""The ``pricefold`` command line (fitcore for the numbers, tui for the screen)."""
