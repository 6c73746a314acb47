"""settle: see DEVELOPERS.md."""
