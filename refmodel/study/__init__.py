"""The quantisation study: sweep, Monte Carlo trials on independent windows, report."""
