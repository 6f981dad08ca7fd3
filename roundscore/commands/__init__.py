"""Command-line subcommands: each module registers its parser and returns an exit code from run()."""
