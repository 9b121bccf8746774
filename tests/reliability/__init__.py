"""Fault-injection and adversarial-input tests (see RELIABILITY.md)."""
