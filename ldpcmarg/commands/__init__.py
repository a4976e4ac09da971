"""CLI commands, one module each (see ``ldpcmarg.cli.COMMANDS``)."""
