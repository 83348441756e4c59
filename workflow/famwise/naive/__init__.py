"""Slow, obviously correct implementations: the oracle for tests and the baseline for `famwise bench`."""
