"""From the evidence to a sample size: planning scenarios, the design registry, exact and simulated
power, the planning table and the stress test.

Kept empty of imports so that light modules (no numpy) stay light."""
