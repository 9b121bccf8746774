"""Truncated Taylor series with automatic coefficients (the arithmetic of :mod:`solvers.taylor`).

A :class:`Series` stands for a function ``u(t0 + tau)`` through its Taylor
coefficients ``u_k = u^{(k)}(t0) / k!``. Calling a vector field once on a
series-valued state (operator overloading, and :data:`NAMESPACE` in place of
``numpy``/``jax.numpy`` through :func:`solvers.array_namespace`) records
the field as a graph of series nodes. Each node computes its ``k``-th
coefficient on demand from its operands' coefficients ``0..k`` (and its
own ``0..k-1``) with the classical recurrences, memoised, so ``p``
coefficients cost O(p^2) per node. The values are plain ``jax.numpy``
arrays: the recursion is unrolled at trace time into array operations that
``jit`` compiles and ``vmap`` batches.

A coefficient may also be a Python float (an exact constant, broadcast over
the node's shape); exact zeros are skipped, so the time series
``t0 + tau`` (coefficients ``t0, 1, 0, 0, ...``) costs almost nothing.

Supported: ``+ - * /``, unary ``-``, ``**`` (non-negative integers by
repeated products, other exponents by the power recurrence), ``sqrt``,
``exp``, ``log``, ``sin``, ``cos`` (computed as a pair), ``tan``, ``tanh``
(through ``exp``), indexing and slicing, iteration, ``stack``,
``concatenate``, ``roll``, ``sum``, ``asarray``, ``reshape``, ``square``.
Anything else (``abs``, ``where``, ``fft``, comparisons, ...) raises
:class:`TaylorUnsupportedError` naming the operation: a Taylor series
needs a field that is analytic along the solution.

References
----------
R. E. Moore, *Interval Analysis*, Prentice-Hall (1966), ch. 11 (recursive
Taylor coefficients). A. Jorba & M. Zou, "A software package for the
numerical integration of ODEs by means of high-order Taylor methods",
Experimental Mathematics 14, 99–117 (2005), section 2 (the recurrences for
products, quotients, powers, exp, log, sin/cos).
"""

from __future__ import annotations

import numbers

import jax.numpy as jnp
import numpy as np

__all__ = ["NAMESPACE", "Series", "TaylorNamespace", "TaylorUnsupportedError", "as_series", "is_series"]


class TaylorUnsupportedError(TypeError):
    """A vector field used an operation the Taylor-series arithmetic does not provide."""

    def __init__(self, op: str, why: str = ""):
        super().__init__(f"the Taylor integrator does not support the operation {op!r} in a vector field"
                         + (f" ({why})" if why else "")
                         + "; supported: + - * / **, sqrt, exp, log, sin, cos, tan, tanh, indexing, "
                           "stack, concatenate, roll, sum, asarray")
        self.op = op


# ---------------------------------------------------------------- coefficient helpers
def _zero(c) -> bool:
    return isinstance(c, float) and c == 0.0


def _const(c) -> bool:
    return isinstance(c, float)


def _add(a, b):
    if _zero(a):
        return b
    if _zero(b):
        return a
    return a + b


def _sub(a, b):
    if _zero(b):
        return a
    if _zero(a):
        return -b
    return a - b


def _mul(a, b):
    if _zero(a) or _zero(b):
        return 0.0
    if isinstance(a, float) and a == 1.0:
        return b
    if isinstance(b, float) and b == 1.0:
        return a
    return a * b


def _sum(terms):
    out = 0.0
    for t in terms:
        out = _add(out, t)
    return out


def _is_array_const(x) -> bool:
    return isinstance(x, (numbers.Number, np.generic, np.ndarray)) or hasattr(x, "shape") and not isinstance(x, Series)


class Series:
    """A lazily evaluated truncated Taylor series of an array-valued function of time.

    Not built directly: :func:`solvers.taylor.taylor_coefficients` makes the
    state and time series, and arithmetic on them builds the rest.

    Attributes
    ----------
    shape : tuple
        Shape of every coefficient (one trajectory; ``vmap`` adds the batch).
    """

    __slots__ = ("_c", "_rule", "shape", "_sc", "parts")
    __array_ufunc__ = None  # numpy scalars defer to our reflected operators
    __array_priority__ = 1000

    def __init__(self, c0, rule=None, shape=None):
        self._c = [c0]
        self._rule = rule
        self._sc = None  # the (sin, cos) pair of this series, made once
        self.parts = None  # for a stack along axis 0: the stacked series (indexing picks them directly)
        self.shape = tuple(shape) if shape is not None else tuple(jnp.shape(c0))

    # -------------------------------------------------------------- coefficients
    def coef(self, k: int):
        """The ``k``-th Taylor coefficient (an array, or a Python float for an exact constant)."""
        c = self._c
        while len(c) <= k:
            if self._rule is None:
                raise RuntimeError(f"coefficient {len(c)} of an input series was requested before it was set")
            c.append(self._rule(len(c), self))
        return c[k]

    def array(self, k: int):
        """Coefficient ``k`` as an array of :attr:`shape`."""
        return jnp.broadcast_to(jnp.asarray(self.coef(k), dtype=jnp.float64), self.shape)

    def _push(self, c):
        self._c.append(c)

    # ------------------------------------------------------------------ shape
    @property
    def ndim(self) -> int:
        return len(self.shape)

    @property
    def size(self) -> int:
        return int(np.prod(self.shape, dtype=int))

    @property
    def dtype(self):
        return jnp.float64

    def __len__(self):
        if not self.shape:
            raise TypeError("len() of a scalar series")
        return self.shape[0]

    def __iter__(self):
        for i in range(len(self)):
            yield self[i]

    def __getitem__(self, idx):
        if isinstance(idx, Series):
            raise TaylorUnsupportedError("indexing by a series")
        if self.parts is not None:
            # structural: y[i] of a stack is its i-th part, y[a:b] a stack of parts (no copy per coefficient)
            first, rest = (idx[0], idx[1:]) if isinstance(idx, tuple) and idx else (idx, ())
            if isinstance(first, (int, np.integer)) and not isinstance(first, bool):
                out = self.parts[int(first)]
                return out[rest] if rest else out
            if isinstance(first, slice) and not rest:
                return stack(self.parts[first]) if len(self.parts[first]) else self._index(idx)
        return self._index(idx)

    def _index(self, idx):
        shape = np.empty(self.shape)[idx].shape
        a = self

        def rule(k, _):
            c = a.coef(k)
            return c if _const(c) else jnp.broadcast_to(c, a.shape)[idx]

        c0 = a.array(0)[idx]
        return Series(c0, rule, shape)

    def reshape(self, *shape):
        shape = shape[0] if len(shape) == 1 and isinstance(shape[0], (tuple, list)) else shape
        a = self
        c0 = a.array(0).reshape(shape)
        return Series(c0, lambda k, _: (lambda c: c if _const(c) else jnp.broadcast_to(c, a.shape).reshape(shape))(
            a.coef(k)), c0.shape)

    @property
    def T(self):
        a = self
        c0 = a.array(0).T
        return Series(c0, lambda k, _: (lambda c: c if _const(c) else jnp.broadcast_to(c, a.shape).T)(a.coef(k)),
                      c0.shape)

    # ------------------------------------------------------------------ arithmetic
    def __add__(self, o):
        if isinstance(o, Series):
            a, b = self, o
            return Series(a.coef(0) + b.coef(0), lambda k, _: _add(a.coef(k), b.coef(k)),
                          jnp.broadcast_shapes(a.shape, b.shape))
        if not _is_array_const(o):
            return NotImplemented
        a = self
        return Series(a.coef(0) + o, lambda k, _: a.coef(k), jnp.broadcast_shapes(a.shape, jnp.shape(o)))

    __radd__ = __add__

    def __neg__(self):
        a = self
        return Series(-a.coef(0), lambda k, _: (lambda c: 0.0 if _zero(c) else -c)(a.coef(k)), a.shape)

    def __pos__(self):
        return self

    def __sub__(self, o):
        if isinstance(o, Series):
            a, b = self, o
            return Series(a.coef(0) - b.coef(0), lambda k, _: _sub(a.coef(k), b.coef(k)),
                          jnp.broadcast_shapes(a.shape, b.shape))
        if not _is_array_const(o):
            return NotImplemented
        return self + (-o)

    def __rsub__(self, o):
        if not _is_array_const(o):
            return NotImplemented
        return (-self) + o

    def __mul__(self, o):
        if isinstance(o, Series):
            a, b = self, o
            if a is b:
                return _square(a)

            def rule(k, _):
                return _sum(_mul(a.coef(j), b.coef(k - j)) for j in range(k + 1))

            return Series(a.coef(0) * b.coef(0), rule, jnp.broadcast_shapes(a.shape, b.shape))
        if not _is_array_const(o):
            return NotImplemented
        if isinstance(o, (int, float)) and not isinstance(o, bool):
            if o == 1.0:
                return self
            if o == -1.0:
                return -self
        a = self
        return Series(a.coef(0) * o, lambda k, _: _mul(a.coef(k), o), jnp.broadcast_shapes(a.shape, jnp.shape(o)))

    __rmul__ = __mul__

    def __truediv__(self, o):
        if isinstance(o, Series):
            return _divide(self, o)
        if not _is_array_const(o):
            return NotImplemented
        if isinstance(o, (int, float)) and not isinstance(o, bool):
            return self * (1.0 / o)
        return self * (1.0 / jnp.asarray(o))

    def __rtruediv__(self, o):
        if not _is_array_const(o):
            return NotImplemented
        return _divide(o, self)

    def __pow__(self, e):
        if isinstance(e, Series):
            return exp(e * log(self))
        if not _is_array_const(e):
            return NotImplemented
        if isinstance(e, (int, np.integer)) or (isinstance(e, (float, np.floating)) and float(e).is_integer()):
            n = int(e)
            if n == 0:
                return Series(jnp.ones(self.shape), lambda k, _: 0.0, self.shape)
            if n < 0:
                return 1.0 / (self ** (-n))
            return _int_power(self, n)
        return _real_power(self, e)

    def __rpow__(self, base):
        if not _is_array_const(base):
            return NotImplemented
        return exp(self * jnp.log(jnp.asarray(base, dtype=jnp.float64)))

    # --------------------------------------------------------- unsupported
    def _no(op):  # noqa: N805  (builds methods)
        def method(self, *a, **kw):
            raise TaylorUnsupportedError(op, "it is not analytic or not elementwise-smooth")

        method.__name__ = op
        return method

    __abs__ = _no("abs")
    __lt__ = _no("<")
    __le__ = _no("<=")
    __gt__ = _no(">")
    __ge__ = _no(">=")
    __floordiv__ = __rfloordiv__ = _no("//")
    __mod__ = __rmod__ = _no("%")
    __matmul__ = __rmatmul__ = _no("@")
    __eq__ = _no("==")
    __ne__ = _no("!=")
    __hash__ = object.__hash__
    del _no

    def __bool__(self):
        raise TaylorUnsupportedError("bool() of a series", "control flow on the state")

    def __float__(self):
        raise TaylorUnsupportedError("float() of a series", "the state is a series, not a number")

    def __array__(self, *args, **kwargs):
        raise TaylorUnsupportedError("conversion to a numpy array", "use the namespace from array_namespace")

    def __repr__(self):
        return f"Series(shape={self.shape}, known={len(self._c)})"


def is_series(x) -> bool:
    return isinstance(x, Series)


def as_series(x, shape=None) -> Series:
    """``x`` if it is a series, else the constant series with value ``x``."""
    if isinstance(x, Series):
        return x
    c0 = jnp.asarray(x, dtype=jnp.float64)
    if shape is not None:
        c0 = jnp.broadcast_to(c0, shape)
    return Series(c0, lambda k, _: 0.0, c0.shape)


# ----------------------------------------------------------------- recurrences
def _square(a: Series) -> Series:
    def rule(k, _):
        half = [_mul(a.coef(j), a.coef(k - j)) for j in range((k + 1) // 2)]
        s = _mul(2.0, _sum(half))
        if k % 2 == 0:
            s = _add(s, _mul(a.coef(k // 2), a.coef(k // 2)))
        return s

    return Series(a.coef(0) * a.coef(0), rule, a.shape)


def _int_power(a: Series, n: int) -> Series:
    """``a ** n`` for n >= 1 by repeated squaring (products only: no division by a_0, so a_0 = 0 is fine)."""
    result, base = None, a
    while n:
        if n & 1:
            result = base if result is None else result * base
        n >>= 1
        if n:
            base = _square(base)
    return result


def _divide(a, b: Series) -> Series:
    """c = a / b: c_k = (a_k - sum_{j=1..k} b_j c_{k-j}) / b_0."""
    a_is = isinstance(a, Series)
    b0 = b.coef(0)
    inv = 1.0 / b0

    def rule(k, c):
        ak = a.coef(k) if a_is else 0.0
        s = _sum(_mul(b.coef(j), c.coef(k - j)) for j in range(1, k + 1))
        return _mul(_sub(ak, s), inv)

    a0 = a.coef(0) if a_is else a
    shape = jnp.broadcast_shapes(a.shape if a_is else jnp.shape(a), b.shape)
    return Series(a0 * inv, rule, shape)


def _real_power(a: Series, e) -> Series:
    """c = a ** e (a_0 != 0): c_k = 1/(k a_0) sum_{j=0..k-1} (e (k - j) - j) a_{k-j} c_j."""
    a0 = a.coef(0)
    inv = 1.0 / a0

    def rule(k, c):
        s = _sum(_mul(_mul(e * (k - j) - j, a.coef(k - j)), c.coef(j)) for j in range(k))
        return _mul(s, inv / k)

    return Series(a0 ** e, rule, a.shape)


def sqrt(a):
    """c = sqrt(a): c_k = (a_k - sum_{j=1..k-1} c_j c_{k-j}) / (2 c_0)."""
    if not isinstance(a, Series):
        return jnp.sqrt(a)
    c0 = jnp.sqrt(a.coef(0))
    half_inv = 0.5 / c0

    def rule(k, c):
        half = [_mul(c.coef(j), c.coef(k - j)) for j in range(1, (k + 1) // 2)]
        s = _mul(2.0, _sum(half))
        if k % 2 == 0:
            s = _add(s, _mul(c.coef(k // 2), c.coef(k // 2)))
        return _mul(_sub(a.coef(k), s), half_inv)

    return Series(c0, rule, a.shape)


def exp(a):
    """c = exp(a): c_k = (1/k) sum_{j=1..k} j a_j c_{k-j}."""
    if not isinstance(a, Series):
        return jnp.exp(a)

    def rule(k, c):
        return _mul(_sum(_mul(_mul(float(j), a.coef(j)), c.coef(k - j)) for j in range(1, k + 1)), 1.0 / k)

    return Series(jnp.exp(a.coef(0)), rule, a.shape)


def log(a):
    """c = log(a): c_k = (a_k - (1/k) sum_{j=1..k-1} j c_j a_{k-j}) / a_0."""
    if not isinstance(a, Series):
        return jnp.log(a)
    inv = 1.0 / a.coef(0)

    def rule(k, c):
        s = _sum(_mul(_mul(float(j), c.coef(j)), a.coef(k - j)) for j in range(1, k))
        return _mul(_sub(a.coef(k), _mul(s, 1.0 / k)), inv)

    return Series(jnp.log(a.coef(0)), rule, a.shape)


def _sincos(a: Series):
    """s = sin(a), c = cos(a): s_k = (1/k) sum j a_j c_{k-j}, c_k = -(1/k) sum j a_j s_{k-j}."""
    if a._sc is not None:
        return a._sc
    pair = {}

    def s_rule(k, s):
        return _mul(_sum(_mul(_mul(float(j), a.coef(j)), pair["c"].coef(k - j)) for j in range(1, k + 1)), 1.0 / k)

    def c_rule(k, c):
        return _mul(_sum(_mul(_mul(float(j), a.coef(j)), pair["s"].coef(k - j)) for j in range(1, k + 1)), -1.0 / k)

    pair["s"] = Series(jnp.sin(a.coef(0)), s_rule, a.shape)
    pair["c"] = Series(jnp.cos(a.coef(0)), c_rule, a.shape)
    a._sc = (pair["s"], pair["c"])
    return a._sc


def sin(a):
    if not isinstance(a, Series):
        return jnp.sin(a)
    return _sincos(a)[0]


def cos(a):
    if not isinstance(a, Series):
        return jnp.cos(a)
    return _sincos(a)[1]


def tan(a):
    if not isinstance(a, Series):
        return jnp.tan(a)
    s, c = _sincos(a)
    return s / c


def tanh(a):
    if not isinstance(a, Series):
        return jnp.tanh(a)
    e2 = exp(2.0 * a)
    return (e2 - 1.0) / (e2 + 1.0)


# ------------------------------------------------------------- structure
def asarray(x, dtype=None):
    if isinstance(x, Series):
        return x
    if isinstance(x, (list, tuple)) and any(isinstance(v, Series) for v in x):
        return stack(x)
    return jnp.asarray(x, dtype=dtype)


def _join(parts, fn, name):
    if not any(isinstance(v, Series) for v in parts):
        return fn([jnp.asarray(v, dtype=jnp.float64) for v in parts])
    parts = [as_series(v) for v in parts]

    def rule(k, _):
        cs = [v.coef(k) for v in parts]
        if all(_zero(c) for c in cs):
            return 0.0
        return fn([v.array(k) for v in parts])

    c0 = fn([v.array(0) for v in parts])
    return Series(c0, rule, c0.shape)


def stack_of(parts) -> Series:
    """``stack(parts)`` along axis 0, remembering the parts so that indexing returns them unchanged."""
    parts = [as_series(v) for v in parts]
    out = _join(parts, lambda cs: jnp.stack(cs, axis=0), "stack")
    if len({v.shape for v in parts}) == 1:
        out.parts = tuple(parts)
    return out


def stack(parts, axis=0):
    parts = list(parts)
    if axis == 0 and any(isinstance(v, Series) for v in parts):
        return stack_of(parts)
    return _join(parts, lambda cs: jnp.stack(cs, axis=axis), "stack")


def concatenate(parts, axis=0):
    parts = list(parts)
    return _join(parts, lambda cs: jnp.concatenate(cs, axis=axis), "concatenate")


def roll(a, shift, axis=None):
    if not isinstance(a, Series):
        return jnp.roll(a, shift, axis=axis)

    def rule(k, _):
        c = a.coef(k)
        return c if _const(c) else jnp.roll(jnp.broadcast_to(c, a.shape), shift, axis=axis)

    return Series(jnp.roll(a.array(0), shift, axis=axis), rule, a.shape)


def sum(a, axis=None):  # noqa: A001  (the array-namespace name)
    if not isinstance(a, Series):
        return jnp.sum(a, axis=axis)
    c0 = jnp.sum(a.array(0), axis=axis)

    def rule(k, _):
        c = a.coef(k)
        return 0.0 if _zero(c) else jnp.sum(a.array(k), axis=axis)

    return Series(c0, rule, c0.shape)


def square(a):
    return _square(a) if isinstance(a, Series) else jnp.square(a)


class TaylorNamespace:
    """The array namespace a vector field gets when it is called on Taylor series.

    Offers the functions listed in the module docstring; any other attribute
    raises :class:`TaylorUnsupportedError` naming it (e.g. ``abs`` for a
    piecewise-linear field, ``fft`` for a spectral one).
    """

    pi = float(np.pi)
    e = float(np.e)
    newaxis = None
    float64 = jnp.float64
    stack = staticmethod(stack)
    concatenate = staticmethod(concatenate)
    roll = staticmethod(roll)
    sum = staticmethod(sum)
    asarray = staticmethod(asarray)
    sqrt = staticmethod(sqrt)
    exp = staticmethod(exp)
    log = staticmethod(log)
    sin = staticmethod(sin)
    cos = staticmethod(cos)
    tan = staticmethod(tan)
    tanh = staticmethod(tanh)
    square = staticmethod(square)

    def array(self, x, dtype=None):
        return asarray(x, dtype)

    def __getattr__(self, name):
        if name.startswith("__"):
            raise AttributeError(name)
        raise TaylorUnsupportedError(name)

    def __repr__(self):
        return "<Taylor-series array namespace>"


NAMESPACE = TaylorNamespace()
