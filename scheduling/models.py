"""Stored projects come with the REST API; the engine needs no tables yet."""
