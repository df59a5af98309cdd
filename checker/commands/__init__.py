"""Subcommands of the deliverycheck CLI, one module each (see checker.cli)."""
