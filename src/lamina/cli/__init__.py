"""Command-line interface; see `lamina.cli.main`."""
