"""The forward model: the chosen stage set, the cached relation grid, the forward evaluation of one star
and the catalogue of quantities."""
