"""The design itself: its dataclasses and keys, units, preferred series, stepping and validation."""
