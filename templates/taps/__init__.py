"""Tap-test recordings of the invented demo project."""
