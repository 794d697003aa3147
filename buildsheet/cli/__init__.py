"""Command line: argument parsing and exit codes only; each subcommand calls the core."""
