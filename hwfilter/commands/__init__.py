"""Subcommands of the ``hwfilter`` command line, one module each (see :mod:`hwfilter.cli`)."""
