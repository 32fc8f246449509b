"""Per-star inference: star records, the posterior, the sampler, derived quantities and the fit."""
