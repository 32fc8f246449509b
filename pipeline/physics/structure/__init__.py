"""Stellar-structure solver: EOS, energy generation, convection, atmosphere, relaxation."""
