"""Rendering of results for people: text, JSON, HTML. Nothing here computes."""
