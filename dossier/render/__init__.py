"""Rendering: Markdown notes, HTML pages from the jinja templates (PDF comes later)."""
