"""run: see DEVELOPERS.md."""
