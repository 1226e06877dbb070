"""altox.cli.main: see DEVELOPERS.md for what this layer holds."""
