"""Subcommands of the `boundwise` command, one module per verb."""
