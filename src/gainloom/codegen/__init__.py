"""codegen layer (see DEVELOPERS.md)."""
