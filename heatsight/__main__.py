"""``python -m heatsight``: the command line."""

import sys

from heatsight.data_io.cli import main

sys.exit(main())
