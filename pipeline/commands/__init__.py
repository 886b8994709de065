"""One module per built-in subcommand."""
