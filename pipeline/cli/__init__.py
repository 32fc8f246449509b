"""The ``radwalk`` command line: the only user of argparse."""
