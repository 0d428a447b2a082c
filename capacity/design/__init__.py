"""Design stage: differentiable objectives (bits per second, per molecule, per symbol) over the symbol interval,
release levels, budget split and receiver geometry, tuned with optax (``optimise.optimise_design``)."""
