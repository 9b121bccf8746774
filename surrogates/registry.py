"""Lookup of learners by name through the ``lyapbench.learners`` entry-point group.

Built-in learners register the same way, in this project's ``pyproject.toml``
(source ``"built-in"``); a third-party distribution adds its own under the
same group (source: that distribution's name). A learner can also be named
by import path, ``"module:Class"``. A name provided by two distributions is
an error naming both.

A learner whose module fails to import is still listed (with an ``"error"``
field), so that one broken plugin does not hide the others; asking for its
class raises :class:`LearnerLoadError`.
"""

from __future__ import annotations

import difflib
import importlib
import inspect
from importlib.metadata import entry_points

from .base import Learner

__all__ = [
    "GROUP",
    "LearnerClashError",
    "LearnerLoadError",
    "UnknownLearnerError",
    "available_learners",
    "learner_class",
    "learner_info",
    "learner_source",
    "list_learners",
    "make_learner",
]

GROUP = "lyapbench.learners"


class UnknownLearnerError(ValueError):
    """A learner name that is not registered; the message names the closest valid ones."""

    def __init__(self, name: str, valid):
        valid = sorted(valid)
        close = difflib.get_close_matches(str(name), valid, n=3, cutoff=0.4)
        hint = f"; did you mean {', '.join(close)}?" if close else ""
        super().__init__(f"unknown learner {name!r}{hint} (valid: {', '.join(valid)})")
        self.name, self.valid = name, valid


class LearnerLoadError(ValueError):
    """A registered or ``module:Class`` learner that cannot be imported or is not a Learner."""


class LearnerClashError(ValueError):
    """Two distributions register the same learner name."""


def _providers() -> dict[str, tuple[str, str]]:
    """name -> (target ``module:Class``, source); source is "built-in" or the distribution name.

    Not cached: reading the entry points takes milliseconds, and a freshly
    installed plugin is then seen without a restart.
    """
    found: dict[str, tuple[str, str]] = {}
    for ep in entry_points(group=GROUP):
        dist = ep.dist.name if getattr(ep, "dist", None) is not None else "unknown distribution"
        source = "built-in" if dist == "lyapbench" else dist
        if ep.name in found and found[ep.name] != (ep.value, source):
            raise LearnerClashError(
                f"learner name {ep.name!r} is provided by both {found[ep.name][1]} "
                f"({found[ep.name][0]}) and {source} ({ep.value})")
        found[ep.name] = (ep.value, source)
    return found


def available_learners() -> list[str]:
    """Names of the registered learners (including ones whose module fails to import)."""
    return sorted(_providers())


def learner_source(name: str) -> str:
    """``"built-in"``, the providing distribution's name, or ``"module:Class"`` for a path."""
    if ":" in name:
        return name
    providers = _providers()
    if name not in providers:
        raise UnknownLearnerError(name, providers)
    return providers[name][1]


def _import_target(target: str, label: str):
    module_name, _, attr = target.partition(":")
    if not module_name or not attr:
        raise LearnerLoadError(f"learner {label!r}: expected 'module:Class', got {target!r}")
    try:
        obj = importlib.import_module(module_name)
    except Exception as exc:  # any import-time failure becomes one line
        detail = str(exc).splitlines()[0] if str(exc) else ""
        raise LearnerLoadError(
            f"learner {label!r}: cannot import module {module_name!r} "
            f"({type(exc).__name__}{': ' + detail if detail else ''})") from None
    for part in attr.split("."):
        try:
            obj = getattr(obj, part)
        except AttributeError:
            raise LearnerLoadError(f"learner {label!r}: module {module_name!r} has no attribute {attr!r}") from None
    if not (isinstance(obj, type) and issubclass(obj, Learner)):
        raise LearnerLoadError(f"learner {label!r}: {target} is not a subclass of surrogates.Learner")
    return obj


def learner_class(name_or_path: str) -> type[Learner]:
    """The learner class for a registered name or a ``module:Class`` path.

    Raises
    ------
    UnknownLearnerError
        Unknown name (the message names the closest valid ones).
    LearnerLoadError
        The module fails to import, lacks the class, or the class is not a Learner.
    """
    if not isinstance(name_or_path, str) or not name_or_path:
        raise UnknownLearnerError(str(name_or_path), _providers())
    if ":" in name_or_path:
        return _import_target(name_or_path, name_or_path)
    providers = _providers()
    if name_or_path not in providers:
        raise UnknownLearnerError(name_or_path, providers)
    return _import_target(providers[name_or_path][0], name_or_path)


def make_learner(name_or_path: str, **hyperparams) -> Learner:
    """An instance of the named learner with hyper-parameter overrides.

    An unknown hyper-parameter is a ``ValueError`` naming the valid ones.
    """
    cls = learner_class(name_or_path)
    valid = cls._param_names()
    unknown = sorted(set(hyperparams) - set(valid))
    if unknown:
        raise ValueError(
            f"learner {name_or_path!r} has no hyper-parameter {unknown[0]!r} "
            f"(valid: {', '.join(valid) if valid else 'none'})")
    return cls(**hyperparams)


def _defaults(cls: type[Learner]) -> dict:
    sig = inspect.signature(cls.__init__)
    return {name: (None if par.default is inspect.Parameter.empty else par.default)
            for name, par in sig.parameters.items() if name != "self"}


def _first_line(text: str) -> str:
    text = inspect.cleandoc(text or "")
    return " ".join(text.split("\n\n")[0].split())


def learner_info(name_or_path: str) -> dict:
    """Description of a learner: name, tasks, physics, source, reference, capabilities, params.

    ``params`` holds the constructor defaults. Raises like :func:`learner_class`.
    """
    cls = learner_class(name_or_path)
    caps = cls.capabilities.as_dict()
    return {
        "name": name_or_path,
        "class": f"{cls.__module__}:{cls.__qualname__}",
        "summary": _first_line(cls.__doc__ or ""),
        "tasks": caps["tasks"],
        "physics": caps["physics"],
        "source": learner_source(name_or_path),
        "reference": " ".join(str(cls.reference).split()),
        "capabilities": caps,
        "params": _defaults(cls),
    }


def list_learners() -> list[dict]:
    """:func:`learner_info` of every registered learner, sorted by name.

    A learner that cannot be loaded is listed with ``tasks``/``physics``
    empty and an ``"error"`` field holding the one-line reason.
    """
    out = []
    for name, (target, source) in sorted(_providers().items()):
        try:
            out.append(learner_info(name))
        except LearnerLoadError as exc:
            out.append({"name": name, "class": target, "summary": "", "tasks": [], "physics": [],
                        "source": source, "reference": "", "capabilities": {}, "params": {},
                        "error": str(exc)})
    return out
