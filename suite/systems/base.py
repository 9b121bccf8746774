"""The system contract: every equation of the project is written once, here.

A system is a class whose instances carry parameter values. Its vector field
``vector_field(t, y, p, without=())`` is written against
:func:`solvers.array_namespace`, so the same body serves scipy's integrators
(numpy arrays), the JAX integrators (``jit``/``vmap``), physics-informed
losses (``grad``) and Jacobians for Lyapunov spectra (``jacfwd``/``jvp``).

Removable terms ("partial physics") are switched off by name through the
``without`` argument; the body multiplies each named term by
``keep("name")``, which is 1.0 or 0.0.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass
from typing import Callable, ClassVar, Mapping

import numpy as np

__all__ = ["PublishedValue", "System", "TermSwitch", "UnknownNameError", "field_namespace", "stack"]


_PLAIN = frozenset({float, int, np.float64})


def field_namespace(y, p, t=None):
    """The array namespace of a vector-field call ``f(t, y, p)``.

    A fast path for scipy's calls (numpy state, float parameters) skips the
    per-value JAX type checks of :func:`solvers.array_namespace`; anything
    else (a traced state, time or parameter) gets ``jax.numpy``.
    """
    if type(y) is np.ndarray and (t is None or type(t) in _PLAIN):
        for v in p.values():
            if type(v) not in _PLAIN:
                break
        else:
            return np
    from solvers import array_namespace

    return array_namespace(y, t, *p.values())


def stack(xp, parts):
    """``xp.stack(parts)``; with numpy, ``np.array`` (``np.stack`` of scalars costs ~40 µs a call)."""
    if xp is np:
        return np.array(parts)
    return xp.stack(parts)


class UnknownNameError(ValueError):
    """A name (system, parameter, term, ...) that does not exist; message names the closest valid ones."""

    def __init__(self, kind: str, name: str, valid):
        valid = sorted(valid)
        close = difflib.get_close_matches(str(name), valid, n=3, cutoff=0.4)
        hint = f"; did you mean {', '.join(close)}?" if close else ""
        super().__init__(f"unknown {kind} {name!r}{hint} (valid: {', '.join(valid)})")
        self.kind, self.name, self.valid = kind, name, valid


@dataclass(frozen=True)
class PublishedValue:
    """A value from the literature that the suite checks itself against.

    ``quantity`` is e.g. ``"lyapunov_spectrum"``, ``"largest_lyapunov_exponent"``,
    ``"period"``, ``"kaplan_yorke_dimension"``; ``params`` records the parameter
    values it holds for (empty: the defaults); ``source`` names the paper or
    handbook, marked "from memory" where the value was recalled.
    """

    quantity: str
    value: float | tuple[float, ...]
    source: str
    params: Mapping[str, float] | None = None


_MEASURED: dict[tuple, float] = {}


class TermSwitch:
    """``keep(name)`` is 0.0 for removed terms and 1.0 otherwise."""

    __slots__ = ("_without",)

    def __init__(self, without=()):
        self._without = frozenset(without)

    def __call__(self, name: str) -> float:
        return 0.0 if name in self._without else 1.0


class System:
    """Base class of a dynamical system.

    Subclasses set the class attributes and implement :meth:`vector_field` and
    :meth:`default_y0`; they may override the optional hooks (conserved
    quantities, Hamiltonian structure, state-dependent dimension).

    Class attributes
    ----------------
    name : str
        Stable registry name (``"lorenz63"``).
    default_params : dict
        Parameter names and default values (floats; integer-valued parameters
        such as Lorenz-96's ``N`` are stored as floats and cast where used).
    terms : tuple of str
        Names of the terms that can be removed for "partial physics".
    chaotic : bool
        Whether the default regime is chaotic (a positive largest exponent).
    sample_dt : float
        Natural sampling step of reference trajectories (time units).
    transient : float
        Time discarded before a state counts as "on the attractor".
    published : tuple of PublishedValue
        Literature values the tests check against.
    measured_lyapunov_exponent : float or None
        Largest exponent at the default parameters as measured by this suite
        (``lyapbench lyapunov``); re-measured by the tests.
    characteristic_time : float or None
        Time unit for non-chaotic systems (a period), used where a Lyapunov
        time does not exist.
    hamiltonian_form : str or None
        ``"separable"`` (H = T(p) + V(q)), ``"general"`` (canonical
        coordinates, non-separable H) or None.
    start_perturbation : float
        Relative size of the random perturbation of :meth:`default_y0` from
        which :meth:`initial_conditions` starts (default 1e-3).
    no_climate : str or None
        Why long-run statistics (the ``climate`` task) mean nothing for this
        system, or None when they do (bounded motion with a long-run
        distribution: an attractor, an energy surface, a stable orbit).
    """

    name: ClassVar[str] = ""
    default_params: ClassVar[dict[str, float]] = {}
    terms: ClassVar[tuple[str, ...]] = ()
    chaotic: ClassVar[bool] = True
    sample_dt: ClassVar[float] = 0.01
    transient: ClassVar[float] = 50.0
    published: ClassVar[tuple[PublishedValue, ...]] = ()
    measured_lyapunov_exponent: ClassVar[float | None] = None
    characteristic_time: ClassVar[float | None] = None
    hamiltonian_form: ClassVar[str | None] = None
    start_perturbation: ClassVar[float] = 1e-3
    no_climate: ClassVar[str | None] = None
    description: ClassVar[str] = ""

    def __init__(self, **params):
        unknown = set(params) - set(self.default_params)
        if unknown:
            raise UnknownNameError(f"parameter of {self.name}", sorted(unknown)[0], self.default_params)
        merged = dict(self.default_params)
        for k, v in params.items():
            try:
                merged[k] = float(v)
            except (TypeError, ValueError):
                raise ValueError(f"parameter {k} of {self.name} must be a number, got {v!r}") from None
            if not np.isfinite(merged[k]):
                raise ValueError(f"parameter {k} of {self.name} must be finite, got {v!r}")
        self.params: dict[str, float] = merged
        self.validate_params()

    # ----------------------------------------------------------- to implement
    def vector_field(self, t, y, p, without=()):
        """dy/dt at time ``t``; ``p`` a mapping of parameter values."""
        raise NotImplementedError

    def default_y0(self) -> np.ndarray:
        """A documented initial condition (on or near the attractor / orbit)."""
        raise NotImplementedError

    # ------------------------------------------------------------ optional hooks
    def validate_params(self) -> None:
        """Raise ``ValueError`` with one clear sentence for invalid parameter values."""

    @property
    def dim(self) -> int:
        return len(self.state_names)

    @property
    def state_names(self) -> tuple[str, ...]:
        raise NotImplementedError

    def conserved_quantities(self) -> dict[str, Callable]:
        """Name -> ``q(y, p)`` for quantities the exact flow conserves (energy, ...)."""
        return {}

    # Hamiltonian structure (systems with ``hamiltonian_form`` set)
    def to_canonical(self, y, p):
        """State -> canonical (q, p) stacked as one vector; identity by default."""
        return y

    def from_canonical(self, z, p):
        return z

    def hamiltonian(self, z, p):
        """H of canonical coordinates ``z = (q, p)``."""
        raise NotImplementedError(f"{self.name} declares no Hamiltonian")

    # --------------------------------------------------------------- provided
    def rhs(self, without=()) -> Callable:
        """The vector field ``f(t, y, p)`` with the named terms removed."""
        if isinstance(without, str):
            without = (without,)
        for term in without:
            if term not in self.terms:
                raise UnknownNameError(f"term of {self.name}", term, self.terms)
        without = tuple(without)

        def f(t, y, p):
            return self.vector_field(t, y, p, without)

        f.__name__ = f"{self.name}_rhs" + (f"_without_{'_'.join(without)}" if without else "")
        return f

    @property
    def lyapunov_exponent(self) -> float | None:
        """Largest Lyapunov exponent.

        At the default parameters: the published value if there is one, else
        the suite's own recorded measurement. At other parameters: a published
        value recorded for exactly those parameters, else measured here
        (one tangent vector, 2,000 time units after the transient, cached in
        memory and on disk by :mod:`suite.cache`) — never the default-parameter
        figure, which would put every time axis in the wrong unit.
        """
        if not self.chaotic:
            return None
        for pv in self.published:
            at_defaults = pv.params in (None, {}) and self.params == self.default_params
            if at_defaults or (pv.params and {**self.default_params, **dict(pv.params)} == self.params):
                if pv.quantity == "largest_lyapunov_exponent":
                    return float(pv.value)
                if pv.quantity == "lyapunov_spectrum":
                    return float(pv.value[0])
        if self.params == self.default_params:
            return self.measured_lyapunov_exponent
        return self._measure_largest_exponent()

    def _measure_largest_exponent(self) -> float:
        key = (self.name, tuple(sorted(self.params.items())))
        if key not in _MEASURED:
            import solvers
            from suite.cache import cached_arrays

            from .spectrum import lyapunov_settings

            opts = lyapunov_settings(self, t_end=1.0)
            opts["t_end"] = float(opts["transient"] + min(2000.0, 2e5 * opts["dt"]))
            desc = {"what": "largest_lyapunov_exponent", "system": self.name, "params": self.params,
                    "settings": {k: v for k, v in opts.items() if isinstance(v, (int, float))}}

            def compute():
                res = solvers.largest_lyapunov_exponent(self.rhs(), self.default_y0(), self.params, **opts)
                return {"exponent": np.array(float(res.exponents[0]))}

            _MEASURED[key] = float(cached_arrays(desc, compute)["exponent"])
        return _MEASURED[key]

    @property
    def lyapunov_time(self) -> float | None:
        lam = self.lyapunov_exponent
        return None if not lam or lam <= 0 else 1.0 / lam

    @property
    def time_unit(self) -> float:
        """Lyapunov time for chaotic systems, the characteristic time otherwise."""
        lt = self.lyapunov_time
        if lt is not None:
            return lt
        return float(self.characteristic_time or 1.0)

    def sources(self) -> list[str]:
        return sorted({pv.source for pv in self.published})

    def initial_conditions(self, n: int, seed: int, spacing: float | None = None) -> np.ndarray:
        """``n`` states on the attractor, drawn reproducibly from ``seed``.

        Integrates (scipy DOP853, tight tolerances) from the default state
        randomly perturbed by :attr:`start_perturbation` and discards :attr:`transient`. On a chaotic attractor
        the states are then ``spacing`` apart (default: 5 Lyapunov times, so
        that they are decorrelated). A regular system (:attr:`chaotic` false)
        needs no decorrelation, only well-spread phases: its states are taken
        within one characteristic time, at the phases ``u + k (sqrt(5) - 1)/2``
        (mod 1, ``k = 0 .. n-1``, ``u`` drawn from ``seed``), the golden-ratio
        sequence, so that any first few are spread too (``spacing`` is
        ignored). Integrating an unstable periodic orbit such as Arenstorf's
        for many periods instead loses the orbit after about two, and the
        drifting satellite then passes close to the primaries: 5 periods per
        state cost minutes of solver time (measured).
        """
        from scipy.integrate import solve_ivp

        rng = np.random.default_rng(seed)
        y0 = np.asarray(self.default_y0(), dtype=float)
        y0 = y0 + self.start_perturbation * rng.standard_normal(y0.shape) * (1.0 + np.abs(y0))
        if self.chaotic:
            spacing = float(spacing or 5.0 * self.time_unit)
            ts = self.transient + spacing * np.arange(1, n + 1)
        else:
            phases = (rng.uniform() + 0.5 * (5.0 ** 0.5 - 1.0) * np.arange(n)) % 1.0
            ts = self.transient + self.time_unit * phases
        order = np.argsort(ts, kind="stable")
        t_end = max(float(ts.max()), 1e-9)  # (0, 0) is no time span
        f = self.rhs()
        p = self.params
        sol = solve_ivp(lambda t, y: f(t, y, p), (0.0, t_end), y0, method="DOP853",
                        t_eval=ts[order], rtol=1e-10, atol=1e-10)
        if not sol.success:
            raise RuntimeError(f"{self.name}: could not draw initial conditions: {sol.message}")
        out = np.empty((n, y0.size))
        out[order] = sol.y.T
        return out

    def describe(self) -> dict:
        """A JSON-ready description (the ``lyapbench systems`` entry)."""
        return {
            "name": self.name,
            "dim": self.dim,
            "params": dict(self.params),
            "state_names": list(self.state_names),
            "terms": list(self.terms),
            "chaotic": self.chaotic,
            "lyapunov_exponent": self.lyapunov_exponent,
            "lyapunov_time": self.lyapunov_time,
            "characteristic_time": self.characteristic_time,
            "hamiltonian": self.hamiltonian_form,
            "sources": self.sources(),
            "description": self.description,
        }

    def __repr__(self) -> str:
        ps = ", ".join(f"{k}={v:g}" for k, v in self.params.items())
        return f"{type(self).__name__}({ps})"
