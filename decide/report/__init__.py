"""Rendering of results: rich tables, JSON, CSV, Markdown.  No numbers are computed here."""
