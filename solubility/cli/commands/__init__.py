"""Subcommands of the `solubility` command line, one module each (see `solubility.cli.main`)."""
