"""Subcommands of the ``rmkit`` command line (see :mod:`rmkit.cli`)."""
