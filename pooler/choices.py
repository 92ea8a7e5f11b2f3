"""Option choices the command line offers, kept free of numpy so that `pooler --help` stays
fast. Each list is pinned to the registry it mirrors by a test (tests/test_bias_registry.py
for the adjusters).
"""
from __future__ import annotations

#: ``--adjuster``: the default rule, the median rule, then one value per bias method that can
#: set the planning effect, in planning order (``pooler.bias.adjuster_choices()``).
ADJUSTERS = ("default", "median", "3psm", "pet-peese", "trim-and-fill", "waap-wls")
