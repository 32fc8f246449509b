"""Pure numerics in cgs on [n] and [n, ngrid] arrays: composition, Lane-Emden, polytropes, energy generation,
transport and the photon random walk; never imports inference, runs, reports or the CLI."""
