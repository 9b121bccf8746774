"""Lookup of systems by name through the ``lyapbench.systems`` entry-point group.

Built-in systems register the same way, in this project's ``pyproject.toml``;
a third-party package adds its own under the same group. A name provided by
two packages is an error naming both.
"""

from __future__ import annotations

import importlib
from functools import lru_cache
from importlib.metadata import entry_points

from .base import System, UnknownNameError

__all__ = ["available_systems", "get_system", "system_class", "RegistryClashError"]

GROUP = "lyapbench.systems"



class RegistryClashError(RuntimeError):
    """Two providers register the same name."""


def _load(target: str):
    module, _, attr = target.partition(":")
    obj = importlib.import_module(module)
    for part in attr.split("."):
        obj = getattr(obj, part)
    return obj


@lru_cache(maxsize=1)
def _providers() -> dict[str, tuple[str, str]]:
    """name -> (target, source); source is "built-in" or the distribution name."""
    found: dict[str, tuple[str, str]] = {}
    for ep in entry_points(group=GROUP):
        dist = ep.dist.name if ep.dist is not None else "unknown"
        dist = "built-in" if dist == "lyapbench" else dist
        if ep.name in found and found[ep.name] != (ep.value, dist):
            raise RegistryClashError(
                f"system name {ep.name!r} is provided by both {found[ep.name][1]} and {dist}")
        found[ep.name] = (ep.value, dist)
    return found


def available_systems() -> list[str]:
    return sorted(_providers())


def system_source(name: str) -> str:
    return _providers()[name][1]


def system_class(name: str) -> type[System]:
    providers = _providers()
    if name not in providers:
        raise UnknownNameError("system", name, providers)
    cls = _load(providers[name][0])
    if not (isinstance(cls, type) and issubclass(cls, System)):
        raise TypeError(f"system {name!r} ({providers[name][0]}) is not a lyapbench System")
    return cls


def get_system(name: str, **params) -> System:
    """An instance of the named system with parameter overrides."""
    return system_class(name)(**params)
