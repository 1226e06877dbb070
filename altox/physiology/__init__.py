"""altox.physiology: see DEVELOPERS.md for what this layer holds."""
