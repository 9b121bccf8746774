"""What a learner is told of the physics, per physics level and task.

Rules (the harness applies them the same way to every learner):

``none``
    ``Physics()``: data only. For systems with canonical coordinates the maps
    to and from them are passed (coordinates, not equations), with the
    parameter values those maps take (e.g. masses), so that learners which
    work in canonical coordinates can learn from data alone.
``full``
    The system's complete vector field ``system.rhs()`` with the true
    parameter values, plus — where the system has them — its Hamiltonian and
    the maps to and from canonical coordinates, and its conserved quantities.
``partial``
    As ``full`` but with one named term of the vector field removed. The term
    is the task option ``removed_term``; by default it is the **last** entry
    of ``system.terms`` (each system orders its terms so that the last one is
    a meaningful omission, e.g. the anharmonic part of the pendulum's
    restoring torque, the ``z`` damping of Lorenz-63). The Hamiltonian is not
    passed at ``partial`` (it would reveal the removed term).
task ``identify``
    The physics of the requested level (``full`` or ``partial``; ``none``
    does not apply: without equations there are no parameters to name), with
    the parameters named by task option ``unknown`` (default: the system's
    first parameter) replaced by an initial guess: the true value times
    ``guess_factor`` (default 1.2, i.e. 20 % off). The Hamiltonian is not
    passed either, since it contains the true parameters.
"""

from __future__ import annotations

from surrogates import NotApplicableError, Physics

__all__ = ["DEFAULT_GUESS_FACTOR", "build_physics", "default_removed_term", "default_unknown"]

DEFAULT_GUESS_FACTOR = 1.2


def default_removed_term(system) -> str | None:
    """The term removed at physics level ``partial``: the last of ``system.terms``."""
    return system.terms[-1] if system.terms else None


def default_unknown(system) -> tuple[str, ...]:
    """The parameters to identify by default: the system's first parameter."""
    names = list(system.default_params)
    return (names[0],) if names else ()


def _as_names(value) -> tuple[str, ...]:
    if value is None or value == "":
        return ()
    if isinstance(value, str):
        return tuple(v.strip() for v in value.split(",") if v.strip())
    return tuple(str(v) for v in value)


def build_physics(system, level: str, task: str, options: dict | None = None) -> tuple[Physics, dict]:
    """The :class:`surrogates.Physics` for ``level`` and ``task``, and a record of the choices.

    Parameters
    ----------
    system : suite.systems.System
    level : {"none", "partial", "full"}
    task : str
    options : dict
        Task options; reads ``removed_term``, ``unknown`` and ``guess_factor``.

    Returns
    -------
    physics : Physics
    info : dict
        ``removed_term``, ``unknown``, ``initial_guess`` where applicable.

    Raises
    ------
    NotApplicableError
        ``partial`` for a system without removable terms; ``identify`` at level ``none``.
    ValueError
        An unknown term or parameter name (one line naming the valid ones).
    """
    options = dict(options or {})
    info: dict = {}
    if level not in ("none", "partial", "full"):
        raise ValueError(f"physics level must be none, partial or full, got {level!r}")
    if task == "identify" and level == "none":
        raise NotApplicableError("task identify needs the equations: physics level full or partial")
    if level == "none":
        if system.hamiltonian_form is not None:
            # coordinates, not equations: learners that need canonical
            # coordinates (Hamiltonian networks) can still learn from data only
            return Physics(params=dict(system.params), to_canonical=system.to_canonical,
                           from_canonical=system.from_canonical), info
        return Physics(), info

    params = dict(system.params)
    removed = None
    if level == "partial":
        removed = options.get("removed_term") or default_removed_term(system)
        if removed is None:
            raise NotApplicableError(f"{system.name} has no removable term for physics level 'partial'")
        field = system.rhs(without=(removed,))  # raises UnknownNameError (a ValueError) for a bad name
        info["removed_term"] = removed
    else:
        field = system.rhs()

    unknown: tuple[str, ...] = ()
    if task == "identify":
        unknown = _as_names(options.get("unknown")) or default_unknown(system)
        bad = [u for u in unknown if u not in params]
        if bad:
            raise ValueError(f"unknown parameter {bad[0]!r} of {system.name} "
                             f"(valid: {', '.join(sorted(params))})")
        factor = float(options.get("guess_factor", DEFAULT_GUESS_FACTOR))
        for u in unknown:
            params[u] = params[u] * factor
        info["unknown"] = list(unknown)
        info["initial_guess"] = {u: params[u] for u in unknown}

    hamiltonian = to_c = from_c = None
    if system.hamiltonian_form is not None:
        to_c, from_c = system.to_canonical, system.from_canonical
        if level == "full" and task != "identify":
            hamiltonian = system.hamiltonian
    conserved = dict(system.conserved_quantities()) if level == "full" and task != "identify" else {}
    physics = Physics(level=level, vector_field=field, params=params, unknown=unknown,
                      removed_term=removed, hamiltonian=hamiltonian, to_canonical=to_c,
                      from_canonical=from_c, conserved=conserved)
    return physics, info
