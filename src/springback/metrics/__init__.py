"""Resilience metrics: pure functions from one participant's data to frozen results."""
