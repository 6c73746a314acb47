"""sweep: see DEVELOPERS.md."""
