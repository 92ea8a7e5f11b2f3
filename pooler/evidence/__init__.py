"""What the literature says: effect sizes, pooling, bias sensitivity, the Bayesian model average
and the audit of the studies' power.

Kept empty of imports so that light modules (no numpy) stay light."""
