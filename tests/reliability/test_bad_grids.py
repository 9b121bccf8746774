"""Random mutations of a valid grid file: one line naming the key, never a traceback, store untouched.

:mod:`tests.harness.test_grid` has the hand-written bad keys and values;
this file throws generated ones at :func:`suite.grid.parse_grid` in
process (hypothesis, seeded through its database-less profile below) and
proves the command-line contract (exit 2, one line, byte-identical store) on
a handful of them.
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from suite.cli import main
from suite.grid import GridError, parse_grid
from suite.store import Store

H = "harness.bad_learners:PolynomialInTime"
VALID = {
    "grid": {"systems": ["lorenz63"], "tasks": ["reconstruct", "forecast"], "learners": ["persistence", H],
             "fractions": [1.0, 0.25], "noise": [0.0, 0.01], "physics": ["none"], "seeds": [0, 1]},
    "budget": {"seconds_per_cell": 30, "iterations_per_cell": 100, "memory_mb_per_cell": 4096},
    "learner": {H: {"degree": 5}},
    "system": {"lorenz63": {"rho": 28.0}},
    "task": {"forecast": {"n_starts": 4}},
}


# ------------------------------------------------------------------ a small TOML writer
def _key(k: str) -> str:
    return k if k.replace("_", "").replace("-", "").isalnum() and k.isascii() else _str(k)


def _str(s: str) -> str:
    return '"' + "".join(c if c.isprintable() and c not in '"\\' else
                         (f"\\u{ord(c):04x}" if ord(c) < 0x10000 else f"\\U{ord(c):08x}") for c in s) + '"'


def _value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return _str(v)
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_key(k)} = {_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def dumps(doc: dict) -> str:
    lines = []
    for top, body in doc.items():
        if not isinstance(body, dict):
            lines.append(f"{_key(top)} = {_value(body)}")
    for top, body in doc.items():
        if isinstance(body, dict):
            lines.append(f"[{_key(top)}]")
            for k, v in body.items():
                lines.append(f"{_key(k)} = {_value(v)}")
    return "\n".join(lines) + "\n"


def test_the_writer_round_trips_the_valid_grid():
    import tomllib
    assert tomllib.loads(dumps(VALID)) == VALID
    assert parse_grid(dumps(VALID)).n_cells == 1 * 2 * 2 * 2 * 2 * 1 * 2


# ------------------------------------------------------------------ mutations
def _paths(doc, prefix=()):
    for k, v in doc.items():
        yield prefix + (k,)
        if isinstance(v, dict):
            yield from _paths(v, prefix + (k,))


PATHS = list(_paths(VALID))
scalars = st.one_of(st.integers(-2**70, 2**70), st.floats(allow_nan=True, allow_infinity=True), st.booleans(),
                    st.text(max_size=12), st.just(""))
values = st.recursive(scalars, lambda inner: st.one_of(st.lists(inner, max_size=4),
                                                       st.dictionaries(st.text(min_size=1, max_size=6), inner,
                                                                       max_size=3)), max_leaves=8)
MUTATIONS = st.one_of(
    st.tuples(st.just("set"), st.sampled_from(PATHS), values),
    st.tuples(st.just("delete"), st.sampled_from(PATHS), st.none()),
    st.tuples(st.just("add"), st.sampled_from([p for p in PATHS if len(p) < 3] + [()]),
              st.tuples(st.text(min_size=1, max_size=8), values)),
)


def _apply(doc, mutation):
    import copy
    doc = copy.deepcopy(doc)
    kind, path, arg = mutation
    walk = path if kind == "add" else path[:-1]
    parent = doc
    for k in walk:  # an earlier mutation may have removed or replaced the way there
        if not isinstance(parent, dict) or k not in parent:
            return doc, ()
        parent = parent[k]
    if not isinstance(parent, dict) or (kind == "delete" and path[-1] not in parent):
        return doc, ()
    if kind == "add":
        name, value = arg
        parent[name] = value
        return doc, path + (name,)
    if kind == "set":
        parent[path[-1]] = arg
    else:
        del parent[path[-1]]
    return doc, path


def _names_the_key(msg: str, path) -> bool:
    path = tuple("".join(c if c.isprintable() else repr(c)[1:-1] for c in k) for k in path)  # as printed
    dotted = [".".join(path[:i]) for i in range(1, len(path) + 1)]
    quoted = [".".join(path[:i - 1] + (f'"{path[i - 1]}"',)) for i in range(1, len(path) + 1)]
    # a table whose name was deleted or changed may be reported by the key that refers to it
    related = ["grid.learners", "grid.systems", "grid.tasks", "grid"] if path and path[0] == "grid" else []
    return any(d in msg for d in dotted + quoted + related) or any(p in msg for p in path)


def _mutated(n):
    return settings(max_examples=n, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow])(
        given(st.lists(MUTATIONS, min_size=1, max_size=3))(_check_mutated))


def _check_mutated(mutations):
    doc, paths = VALID, []
    for m in mutations:
        doc, p = _apply(doc, m)
        if p:
            paths.append(p)
    text = dumps(doc)
    try:
        grid = parse_grid(text, label="mutated.toml")
    except GridError as exc:
        msg = str(exc)
        assert "\n" not in msg and msg.startswith("mutated.toml: "), msg
        assert "Traceback" not in msg
        if "not valid TOML" not in msg:
            assert any(_names_the_key(msg, p) for p in paths), (msg, paths)
        return
    # accepted: it must be a usable grid
    assert grid.n_cells == len(grid.cells()) >= 1


test_mutated_grids_are_valid_or_one_line_naming_the_key = _mutated(120)
test_mutated_grids_many_more_examples = pytest.mark.slow(_mutated(1500))


@settings(max_examples=100, deadline=None, derandomize=True, database=None)
@given(st.data())
def test_textual_damage_is_one_line(data):
    """Duplicate, truncate, or splice lines of the valid text (duplicate keys, broken tables)."""
    lines = dumps(VALID).splitlines()
    op = data.draw(st.sampled_from(["duplicate", "truncate", "splice", "bytes"]))
    i = data.draw(st.integers(0, len(lines) - 1))
    if op == "duplicate":
        lines.insert(i, lines[i])
    elif op == "truncate":
        lines[i] = lines[i][:data.draw(st.integers(0, len(lines[i])))]
    elif op == "splice":
        lines[i] = lines[i] + data.draw(st.sampled_from(["]", "[", "=", '"', ",", " = 1", "[[x]]"]))
    else:
        lines[i] = data.draw(st.text(max_size=20))
    try:
        parse_grid("\n".join(lines), label="damaged.toml")
    except GridError as exc:
        assert "\n" not in str(exc) and str(exc).startswith("damaged.toml: ")


def test_huge_grid_is_refused_by_its_size_not_built():
    doc = {**VALID, "grid": {**VALID["grid"], "seeds": list(range(2000)),
                             "noise": [i / 1000 for i in range(1000)]}}
    with pytest.raises(GridError, match=r"grid: .*cells"):
        parse_grid(dumps(doc), label="huge.toml")


# ------------------------------------------------------------------ through the command line
BAD_FOR_CLI = [
    ("types", {**VALID, "budget": {"seconds_per_cell": "ten"}}, "budget.seconds_per_cell"),
    ("range", {**VALID, "grid": {**VALID["grid"], "fractions": [1.5]}}, "grid.fractions"),
    ("unknown", {**VALID, "grid": {**VALID["grid"], "sedes": [1]}}, "grid.sedes"),
    ("huge", {**VALID, "grid": {**VALID["grid"], "seeds": list(range(2000)),
                                "noise": [i / 1000 for i in range(1000)]}}, "grid"),
]


@pytest.mark.parametrize("name,doc,key", BAD_FOR_CLI, ids=[c[0] for c in BAD_FOR_CLI])
def test_cli_refuses_with_one_line_and_leaves_the_store_byte_identical(tmp_path, capsys, name, doc, key):
    store = tmp_path / "s.sqlite"
    with Store.open(store, create=True):
        pass
    before = sorted((p.name, p.read_bytes()) for p in tmp_path.iterdir())
    grid = tmp_path / "bad.toml"
    grid.write_text(dumps(doc))
    assert main(["run", str(grid), "--store", str(store), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and f" {key}:" in err and "Traceback" not in err, err
    after = sorted((p.name, p.read_bytes()) for p in tmp_path.iterdir() if p.name != "bad.toml")
    assert after == before


@pytest.mark.parametrize("process", ["in-process", pytest.param("entry-point", marks=pytest.mark.slow)])
def test_duplicate_key_is_one_line_quoting_it(tmp_path, capsys, process):
    grid = tmp_path / "dup.toml"
    grid.write_text(dumps(VALID).replace('seeds = [0, 1]', 'seeds = [0, 1]\nseeds = [2]'))
    store = tmp_path / "s.sqlite"
    argv = ["run", str(grid), "--store", str(store)]
    if process == "in-process":
        code, err = main(argv), capsys.readouterr().err
    else:
        exe = Path(sys.executable).with_name("lyapbench")
        r = subprocess.run([str(exe), *argv], capture_output=True, text=True, timeout=300, cwd=tmp_path)
        code, err = r.returncode, r.stderr
    assert code == 2 and err.count("\n") == 1 and "Traceback" not in err, err
    assert "seeds = [2]" in err and not store.exists()
