"""Concrete dynamical systems: the only place that writes an equation."""

from __future__ import annotations

from .base import PublishedValue, System, TermSwitch, UnknownNameError
from .registry import RegistryClashError, available_systems, get_system, system_class

__all__ = [
    "PublishedValue",
    "RegistryClashError",
    "System",
    "TermSwitch",
    "UnknownNameError",
    "available_systems",
    "get_system",
    "system_class",
]
