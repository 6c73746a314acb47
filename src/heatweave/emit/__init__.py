"""emit: see DEVELOPERS.md."""
