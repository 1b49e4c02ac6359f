"""The command line, installed as ``polarsky.cli`` (see :mod:`polarsky.cli.main`)."""
