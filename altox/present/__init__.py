"""altox.present: see DEVELOPERS.md for what this layer holds."""
