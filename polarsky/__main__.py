"""``python -m polarsky``: the same as the ``polarsky`` command."""

from polarsky.cli.main import entry

entry()
