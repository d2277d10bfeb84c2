"""Rendering of sampling results as documents (charts) for people to read."""
