"""design layer (see DEVELOPERS.md)."""
