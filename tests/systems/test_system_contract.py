"""Every built-in system honours the system contract (equations once, numpy and JAX)."""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from suite.systems import PublishedValue, UnknownNameError, available_systems, get_system

from ._helpers import BUILT_IN, INVALID_PARAMS, generic_state


def test_all_built_in_systems_are_registered():
    assert set(BUILT_IN) <= set(available_systems())


@pytest.mark.parametrize("name", BUILT_IN)
def test_shapes_and_description(name):
    s = get_system(name)
    y0 = np.asarray(s.default_y0())
    assert s.name == name
    assert y0.shape == (s.dim,) == (len(s.state_names),)
    assert len(set(s.state_names)) == s.dim
    assert s.description and s.sample_dt > 0 and s.transient >= 0
    assert s.time_unit > 0
    if s.chaotic:
        assert s.lyapunov_exponent and s.lyapunov_exponent > 0
    else:
        assert s.characteristic_time and s.characteristic_time > 0
    for pv in s.published:
        assert isinstance(pv, PublishedValue) and pv.source
    f = s.rhs()
    assert np.all(np.isfinite(f(0.3, y0, s.params)))


@pytest.mark.parametrize("name", BUILT_IN)
def test_vector_field_under_jit_grad_jacfwd_vmap_matches_numpy(name):
    s = get_system(name)
    f = s.rhs()
    p = s.params
    y = generic_state(s)
    first = next(iter(s.default_params))

    @jax.jit
    def traced(t, z, v):
        q = {**p, first: v}
        return (f(t, z, q),
                jax.jacfwd(lambda w: f(t, w, q))(z),
                jax.grad(lambda u: jnp.sum(f(t, z, {**q, first: u}) ** 2))(v),
                jax.vmap(lambda w: f(t, w, q))(jnp.stack([z, 1.01 * z])))

    value, jac, grad, batch = traced(0.3, jnp.asarray(y), jnp.asarray(p[first]))
    expected = f(0.3, y, p)
    np.testing.assert_allclose(np.asarray(value), expected, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(np.asarray(batch[1]), f(0.3, 1.01 * y, p), rtol=1e-12, atol=1e-12)
    assert np.isfinite(float(grad))
    # forward-mode Jacobian against central differences of the numpy path
    h = 1e-6
    fd = np.stack([(f(0.3, y + h * e, p) - f(0.3, y - h * e, p)) / (2 * h) for e in np.eye(s.dim)], axis=1)
    np.testing.assert_allclose(np.asarray(jac), fd, rtol=1e-5, atol=1e-5 * (1 + np.abs(fd).max()))


@pytest.mark.parametrize("name", BUILT_IN)
def test_removing_each_term_changes_the_field(name):
    s = get_system(name)
    y = generic_state(s)
    full = s.rhs()(0.3, y, s.params)
    assert s.terms, f"{name} declares no removable terms"
    for term in s.terms:
        partial = s.rhs(without=term)(0.3, y, s.params)
        assert np.abs(partial - full).max() > 1e-6 * (1 + np.abs(full).max()), term


@pytest.mark.parametrize("name", BUILT_IN)
def test_unknown_term_and_parameter_are_named(name):
    s = get_system(name)
    with pytest.raises(UnknownNameError, match="unknown term"):
        s.rhs(without="no_such_term")
    with pytest.raises(UnknownNameError, match="unknown parameter"):
        get_system(name, no_such_parameter=1.0)


@pytest.mark.parametrize("name", BUILT_IN)
def test_invalid_parameters_give_one_sentence(name):
    bad = INVALID_PARAMS[name]
    with pytest.raises(ValueError) as info:
        get_system(name, **bad)
    msg = str(info.value)
    assert "\n" not in msg and name in msg and next(iter(bad)) in msg


@pytest.mark.parametrize("name", BUILT_IN)
def test_conserved_quantities_are_constant_along_the_flow(name):
    """d/dt Q(y) = grad Q . f(y) vanishes for each conserved quantity (exact identity)."""
    s = get_system(name)
    f = s.rhs()
    p = s.params
    y = jnp.asarray(generic_state(s, seed=1))
    quantities = s.conserved_quantities()

    @jax.jit
    def rates(z):
        v = f(0.0, z, p)
        out = {}
        for qname, q in quantities.items():
            g = jax.grad(lambda w: jnp.sum(q(w, p)))(z)
            out[qname] = (jnp.dot(g, v), jnp.linalg.norm(g) * jnp.linalg.norm(v))
        return out

    for qname, (rate, size) in rates(y).items():
        assert abs(float(rate)) <= 1e-12 * max(float(size), 1.0), (qname, float(rate))


@pytest.mark.parametrize("name", [n for n in BUILT_IN if get_system(n).hamiltonian_form])
def test_vector_field_is_the_hamiltonian_flow(name):
    """to_canonical maps the field onto J grad H (Hamilton's equations)."""
    s = get_system(name)
    p = s.params
    f = s.rhs()
    y = jnp.asarray(generic_state(s, seed=2))

    @jax.jit
    def both_sides(v):
        z, zdot = jax.jvp(lambda u: s.to_canonical(u, p), (v,), (f(0.0, v, p),))
        grad_h = jax.grad(lambda w: s.hamiltonian(w, p))(z)
        half = z.shape[0] // 2
        return z, zdot, jnp.concatenate([grad_h[half:], -grad_h[:half]])

    z, zdot, expected = both_sides(y)
    half = z.shape[0] // 2
    np.testing.assert_allclose(np.asarray(zdot), np.asarray(expected), rtol=1e-11, atol=1e-11)
    np.testing.assert_allclose(np.asarray(s.from_canonical(z, p)), np.asarray(y), rtol=1e-13, atol=1e-13)
    if s.hamiltonian_form == "separable":
        h = s.kinetic(z[half:], p) + s.potential(z[:half], p)
        assert float(h) == pytest.approx(float(s.hamiltonian(z, p)), rel=1e-14, abs=1e-14)
