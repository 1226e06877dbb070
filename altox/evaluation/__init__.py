"""altox.evaluation: see DEVELOPERS.md for what this layer holds."""
