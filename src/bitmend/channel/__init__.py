"""Fault models applied to byte streams (used by the demo, inject and simulate)."""
