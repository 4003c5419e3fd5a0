"""Renderers of one verdict structure: text, JSON, Markdown, JUnit XML and HTML."""
