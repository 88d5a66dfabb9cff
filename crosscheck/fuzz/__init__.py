"""Fuzzing: seeded random networks, Hypothesis strategies, the fuzz loop, shrinking, deliberate faults for tests."""
