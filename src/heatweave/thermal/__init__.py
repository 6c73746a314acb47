"""thermal: see DEVELOPERS.md."""
