"""``python -m radwalk`` runs the command line."""

import sys

from radwalk.cli.main import main

sys.exit(main())
