"""Writes. Each function owns its transaction and checks the acting user's role."""
