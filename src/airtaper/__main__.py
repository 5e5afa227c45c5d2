"""`python -m airtaper`: the same as the `airtaper` command."""

from airtaper.cli.main import console

console()
