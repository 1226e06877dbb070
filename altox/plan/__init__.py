"""altox.plan: see DEVELOPERS.md for what this layer holds."""
