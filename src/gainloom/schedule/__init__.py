"""schedule layer (see DEVELOPERS.md)."""
