"""Figures per star and per catalog and the static HTML report, read from stored results only."""
