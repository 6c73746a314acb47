"""spice: see DEVELOPERS.md."""
