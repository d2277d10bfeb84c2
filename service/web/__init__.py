"""The web plumbing every endpoint shares; see README.md in this folder."""
