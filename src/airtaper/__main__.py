"""`python -m airtaper`: the same as the `airtaper` command."""

import sys

from airtaper.cli.main import main

sys.exit(main())
