"""report layer (see DEVELOPERS.md): the verification log (JSON + Markdown) and its plots."""

from .log import JSON_NAME, MARKDOWN_NAME, render_verification, write_verification

__all__ = ["write_verification", "render_verification", "JSON_NAME", "MARKDOWN_NAME"]
