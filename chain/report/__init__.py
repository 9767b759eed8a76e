"""Renderers over results: they read, format and compute no new physics."""
