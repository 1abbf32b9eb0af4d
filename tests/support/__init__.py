"""Shared test helpers: simulators with known parameters, sample projects, a local mail server."""
