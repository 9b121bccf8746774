"""Grid files: a study written as TOML, validated in full, expanded into cells.

A grid file has these tables (every key is checked; an unknown key is an
error, never silently ignored)::

    [grid]
    systems   = ["lorenz63"]                 # registered system names
    tasks     = ["forecast", "reconstruct"]  # see suite.tasks.TASKS
    learners  = ["sindy", "mypkg.mod:MyLearner"]
    fractions = [1.0, 0.1]                   # share of the samples kept, in (0, 1]
    noise     = [0.0, 0.01]                  # noise level >= 0
    physics   = ["none"]                     # none | partial | full
    seeds     = [0, 1, 2]                    # integers

    [budget]
    seconds_per_cell    = 300                # wall-clock limit the runner enforces
    iterations_per_cell = 2000               # optional, handed to the learner
    memory_mb_per_cell  = 4096               # optional address-space limit per worker

    [learner.sindy]                          # hyper-parameters of one learner
    threshold = 0.05

    [system.lorenz63]                        # parameter overrides of one system
    rho = 28.0

    [task.forecast]                          # options of one task
    n_starts = 8

``fractions``, ``noise``, ``physics`` and ``seeds`` may be omitted (defaults:
``[1.0]``, ``[0.0]``, ``["none"]``, ``[0]``); a single value may be written
without brackets. The cells are the full Cartesian product, in the order
systems × tasks × learners × fractions × noise × physics × seeds. A learner
that lacks a capability still gets its cells: running them records
``not_applicable``.

A study that is not one product (a core table plus sparsity curves on a few
systems, say) writes several ``[[grid]]`` blocks instead of one ``[grid]``
table. Each block has the keys above and is its own product; the study is
their union, in block order, a cell named by two blocks listed once. The
``[budget]``, ``[learner.*]``, ``[system.*]`` and ``[task.*]`` tables are
shared by every block, so such a cell has one key whichever block names it.

Every problem raises :class:`GridError` (a ``ValueError``) whose message is
one line naming the file, the key and the reason. :func:`load_grid` does all
checks before returning, so a caller that opens a store only after it can
never modify a store on behalf of an invalid grid.
"""

from __future__ import annotations

import hashlib
import itertools
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from suite.cell import CellSpec

__all__ = ["Grid", "GridError", "load_grid", "parse_grid", "DEFAULT_SECONDS_PER_CELL"]

DEFAULT_SECONDS_PER_CELL = 600.0
MAX_CELLS = 1_000_000  # a larger product is a typo, not a study (and would exhaust memory when expanded)

_GRID_KEYS = ("systems", "tasks", "learners", "fractions", "noise", "physics", "seeds")
_BUDGET_KEYS = ("seconds_per_cell", "iterations_per_cell", "memory_mb_per_cell")
_TOP_KEYS = ("grid", "budget", "learner", "system", "task")


class GridError(ValueError):
    """An invalid grid file; the message is one line: ``FILE: KEY: reason``."""


@dataclass(frozen=True)
class Grid:
    """A validated grid.

    Attributes
    ----------
    name : str
        The file's stem; the default store is ``results/<name>.sqlite``.
    path : str
    sha256 : str
        Hash of the file's bytes (recorded in the manifest).
    systems, tasks, learners, physics : tuple of str
    fractions, noise : tuple of float
    seeds : tuple of int
    seconds_per_cell : float
    iterations_per_cell, memory_mb_per_cell : int or None
    learner_params, system_params, task_options : dict
        name -> overrides, only for names present in the grid.
    products : tuple
        One ``(systems, tasks, learners, fractions, noise, physics, seeds)``
        tuple per ``[[grid]]`` block; empty for a single ``[grid]`` table,
        whose product is the attributes above (which, for several blocks,
        are the union of the blocks' lists, for display).
    """

    name: str
    path: str
    sha256: str
    systems: tuple
    tasks: tuple
    learners: tuple
    fractions: tuple = (1.0,)
    noise: tuple = (0.0,)
    physics: tuple = ("none",)
    seeds: tuple = (0,)
    seconds_per_cell: float = DEFAULT_SECONDS_PER_CELL
    iterations_per_cell: int | None = None
    memory_mb_per_cell: int | None = None
    learner_params: dict = field(default_factory=dict)
    system_params: dict = field(default_factory=dict)
    task_options: dict = field(default_factory=dict)
    products: tuple = ()

    def _products(self) -> tuple:
        return self.products or ((self.systems, self.tasks, self.learners, self.fractions,
                                  self.noise, self.physics, self.seeds),)

    @property
    def n_cells(self) -> int:
        """Number of distinct cells."""
        if not self.products:
            return math.prod(map(len, self._products()[0]))
        return len(self.cells())

    def cells(self) -> list[CellSpec]:
        """All distinct cells, product after product (see the module docstring for the order)."""
        out, seen = [], set()
        for product in self._products():
            for spec in self._product_cells(product):
                if len(self.products) > 1:
                    k = spec.key()
                    if k in seen:
                        continue
                    seen.add(k)
                out.append(spec)
        return out

    def _product_cells(self, product):
        for system, task, learner, fraction, noise, physics, seed in itertools.product(*product):
            yield CellSpec(
                system=system, task=task, learner=learner, fraction=float(fraction),
                noise=float(noise), physics=physics, seed=int(seed),
                system_params=dict(self.system_params.get(system, {})),
                learner_params=dict(self.learner_params.get(learner, {})),
                budget_seconds=float(self.seconds_per_cell),
                budget_iterations=self.iterations_per_cell,
                task_options=dict(self.task_options.get(task, {})))


# ---------------------------------------------------------------- validation helpers
class _Checker:
    def __init__(self, label: str):
        self.label = label

    def fail(self, key: str, reason: str):
        key = "".join(c if c.isprintable() else repr(c)[1:-1] for c in str(key))  # a key may hold "\n"
        raise GridError(" ".join(f"{self.label}: {key}: {reason}".splitlines()))

    def unknown_keys(self, table: dict, allowed, where: str):
        for k in table:
            if k not in allowed:
                prefix = f"{where}." if where else ""
                self.fail(f"{prefix}{k}", f"unknown key (valid: {', '.join(allowed)})")

    def table(self, value, key: str) -> dict:
        if not isinstance(value, dict):
            self.fail(key, f"must be a table, got {_tname(value)}")
        return value

    def list_of(self, value, key: str, kind: str, check=None) -> tuple:
        items = value if isinstance(value, list) else [value]
        if not items:
            self.fail(key, "must not be empty")
        out = []
        for item in items:
            if kind == "str":
                if not isinstance(item, str) or not item:
                    self.fail(key, f"expected non-empty strings, got {item!r}")
            elif kind == "number":
                if isinstance(item, bool) or not isinstance(item, (int, float)):
                    self.fail(key, f"expected numbers, got {item!r}")
                if not math.isfinite(item):
                    self.fail(key, f"expected finite numbers, got {item!r}")
                item = float(item)
            elif kind == "int":
                if isinstance(item, bool) or not isinstance(item, int):
                    self.fail(key, f"expected integers, got {item!r}")
            if check is not None:
                check(item)
            out.append(item)
        dup = [x for x in out if out.count(x) > 1]
        if dup:
            self.fail(key, f"value {dup[0]!r} is listed twice")
        return tuple(out)


def _tname(value) -> str:
    return {dict: "a table", list: "a list", str: "a string", bool: "a boolean",
            int: "an integer", float: "a number"}.get(type(value), type(value).__name__)


def _task_registry():
    """(task names, task -> {option: default})."""
    try:
        from suite.tasks import TASK_OPTION_DEFAULTS, TASKS
    except ModuleNotFoundError as exc:  # the task module not built yet: tasks without options
        if exc.name != "suite.tasks":
            raise
        from surrogates.data import TASKS
        return tuple(TASKS), {}
    return tuple(TASKS), dict(TASK_OPTION_DEFAULTS)


def _resolve_option(task: str, name: str, value):
    """The task module's own check and normalisation of one option value."""
    try:
        from suite.tasks import resolve_task_options
    except ImportError:
        return value
    return resolve_task_options(task, {name: value})[name]


def _same_kind(default, value) -> bool:
    if default is None:
        return True
    if isinstance(default, bool):
        return isinstance(value, bool)
    if isinstance(default, (int, float)):
        return isinstance(value, (int, float)) and not isinstance(value, bool) and (
            isinstance(value, int) or not isinstance(default, int) or float(value).is_integer())
    if isinstance(default, str):
        return isinstance(value, str)
    if isinstance(default, (list, tuple)):
        return isinstance(value, list)
    return True


# ---------------------------------------------------------------- parsing
def parse_grid(text: str, label: str = "<grid>", name: str = "grid") -> Grid:
    """Validate grid TOML ``text``; ``label`` names the file in error messages."""
    from suite.systems import available_systems, get_system

    c = _Checker(label)
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        where = ""  # quote the offending line: it names the key (a duplicate key, a bad value)
        m = re.search(r"at line (\d+)", str(exc))
        lines = text.splitlines()
        if m and 0 < int(m.group(1)) <= len(lines) and lines[int(m.group(1)) - 1].strip():
            where = f": {lines[int(m.group(1)) - 1].strip()[:80]!r}"
        raise GridError(" ".join(f"{label}: not valid TOML ({exc}){where}".splitlines())) from None
    c.unknown_keys(doc, _TOP_KEYS, "")
    if "grid" not in doc:
        c.fail("grid", "missing table [grid] (or [[grid]] blocks)")
    raw = doc["grid"]
    if isinstance(raw, list):
        if not raw:
            c.fail("grid", "no [[grid]] blocks")
        blocks = [(c.table(b, f"grid[{i}]"), f"grid[{i}]") for i, b in enumerate(raw, 1)]
    else:
        blocks = [(c.table(raw, "grid"), "grid")]

    task_names, option_defaults = _task_registry()
    known_systems = available_systems()
    classes = {}
    products = [_parse_product(c, g, where, known_systems, task_names, classes) for g, where in blocks]
    n_cells = sum(math.prod(map(len, p)) for p in products)
    if n_cells > MAX_CELLS:
        c.fail("grid", f"{n_cells} cells in the product of its lists, more than the limit of {MAX_CELLS}")
    in_grid = "grid." if len(blocks) == 1 else "any [[grid]] block's "
    systems, tasks, learners, fractions, noise, physics, seeds = (
        tuple(dict.fromkeys(v for p in products for v in p[i])) for i in range(7))

    # [budget]
    b = c.table(doc.get("budget", {}), "budget")
    c.unknown_keys(b, _BUDGET_KEYS, "budget")
    seconds = b.get("seconds_per_cell", DEFAULT_SECONDS_PER_CELL)
    if isinstance(seconds, bool) or not isinstance(seconds, (int, float)) or not math.isfinite(seconds) \
            or seconds <= 0:
        c.fail("budget.seconds_per_cell", f"must be a positive number of seconds, got {seconds!r}")
    ints = {}
    for key in ("iterations_per_cell", "memory_mb_per_cell"):
        v = b.get(key)
        if v is not None and (isinstance(v, bool) or not isinstance(v, int) or v <= 0):
            c.fail(f"budget.{key}", f"must be a positive integer, got {v!r}")
        ints[key] = v

    # [learner.<name>]
    learner_params = {}
    for ln, params in c.table(doc.get("learner", {}), "learner").items():
        key = f"learner.{ln}"
        params = c.table(params, key)
        if ln not in learners:
            c.fail(key, f"learner {ln!r} is not in {in_grid}learners")
        valid = classes[ln]._param_names()
        for p in params:
            if p not in valid:
                c.fail(f"{key}.{p}", f"learner {ln!r} has no hyper-parameter {p!r} "
                                    f"(valid: {', '.join(valid) if valid else 'none'})")
        learner_params[ln] = dict(params)

    # [system.<name>]
    system_params = {}
    for sn, params in c.table(doc.get("system", {}), "system").items():
        key = f"system.{sn}"
        params = c.table(params, key)
        if sn not in systems:
            c.fail(key, f"system {sn!r} is not in {in_grid}systems")
        for p, v in params.items():
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                c.fail(f"{key}.{p}", f"must be a number, got {v!r}")
        try:
            get_system(sn, **params)
        except ValueError as exc:
            bad = next((p for p in params if repr(p) in str(exc) or f" {p} " in str(exc)), None)
            c.fail(f"{key}.{bad}" if bad else key, str(exc))
        system_params[sn] = {p: float(v) for p, v in params.items()}

    # [task.<name>]
    task_options = {}
    for tn, opts in c.table(doc.get("task", {}), "task").items():
        key = f"task.{tn}"
        opts = c.table(opts, key)
        if tn not in tasks:
            c.fail(key, f"task {tn!r} is not in {in_grid}tasks")
        defaults = option_defaults.get(tn, {})
        for o, v in opts.items():
            if o not in defaults:
                c.fail(f"{key}.{o}", f"task {tn!r} has no option {o!r} "
                                    f"(valid: {', '.join(sorted(defaults)) if defaults else 'none'})")
            if not _same_kind(defaults[o], v):
                c.fail(f"{key}.{o}", f"expected {_tname(defaults[o])} like the default "
                                    f"{defaults[o]!r}, got {v!r}")
            try:
                opts[o] = _resolve_option(tn, o, v)
            except ValueError as exc:
                c.fail(f"{key}.{o}", str(exc))
        task_options[tn] = dict(opts)

    sha = hashlib.sha256(text.encode()).hexdigest()
    return Grid(name=name, path=label, sha256=sha, systems=systems, tasks=tasks, learners=learners,
                fractions=fractions, noise=noise, physics=physics, seeds=seeds,
                seconds_per_cell=float(seconds), iterations_per_cell=ints["iterations_per_cell"],
                memory_mb_per_cell=ints["memory_mb_per_cell"], learner_params=learner_params,
                system_params=system_params, task_options=task_options,
                products=tuple(products) if len(products) > 1 else ())


def _parse_product(c: _Checker, g: dict, where: str, known_systems, task_names, classes) -> tuple:
    """Check one ``[grid]`` table or ``[[grid]]`` block; its seven lists.

    ``classes`` collects name -> learner class for the learners seen.
    """
    from surrogates.data import PHYSICS_LEVELS
    from surrogates.registry import available_learners, learner_class

    c.unknown_keys(g, _GRID_KEYS, where)
    for required in ("systems", "tasks", "learners"):
        if required not in g:
            c.fail(f"{where}.{required}", "missing (the grid would be empty)")

    def check_system(s):
        if s not in known_systems:
            c.fail(f"{where}.systems", f"unknown system {s!r} (valid: {', '.join(known_systems)})")

    def check_task(t):
        if t not in task_names:
            c.fail(f"{where}.tasks", f"unknown task {t!r} (valid: {', '.join(task_names)})")

    def check_fraction(f):
        if not 0.0 < f <= 1.0:
            c.fail(f"{where}.fractions", f"fraction {f!r} is outside (0, 1]")

    def check_noise(n):
        if n < 0:
            c.fail(f"{where}.noise", f"noise level {n!r} is negative")

    def check_physics(p):
        if p not in PHYSICS_LEVELS:
            c.fail(f"{where}.physics", f"unknown physics level {p!r} (valid: {', '.join(PHYSICS_LEVELS)})")

    def check_seed(s):
        if s < 0 or s >= 2**63:
            c.fail(f"{where}.seeds", f"seed {s!r} must be in [0, 2**63)")

    systems = c.list_of(g["systems"], f"{where}.systems", "str", check_system)
    tasks = c.list_of(g["tasks"], f"{where}.tasks", "str", check_task)
    learners = c.list_of(g["learners"], f"{where}.learners", "str")
    for ln in learners:
        if ln in classes:
            continue
        try:
            classes[ln] = learner_class(ln)
        except ValueError as exc:
            msg = str(exc)
            if ":" not in ln and "unknown learner" not in msg:
                msg = f"{msg} (valid: {', '.join(available_learners())})"
            c.fail(f"{where}.learners", msg)
    fractions = c.list_of(g.get("fractions", [1.0]), f"{where}.fractions", "number", check_fraction)
    noise = c.list_of(g.get("noise", [0.0]), f"{where}.noise", "number", check_noise)
    physics = c.list_of(g.get("physics", ["none"]), f"{where}.physics", "str", check_physics)
    seeds = c.list_of(g.get("seeds", [0]), f"{where}.seeds", "int", check_seed)
    return systems, tasks, learners, fractions, noise, physics, seeds


def load_grid(path) -> Grid:
    """Read and validate a grid file (see the module docstring).

    Raises
    ------
    GridError
        One line naming the file, the key and the reason.
    """
    p = Path(path)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise GridError(f"{path}: grid file does not exist") from None
    except IsADirectoryError:
        raise GridError(f"{path}: is a folder, expected a grid file") from None
    except OSError as exc:
        raise GridError(f"{path}: cannot read ({exc.strerror})") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise GridError(f"{path}: not a UTF-8 text file") from None
    return parse_grid(text, label=str(path), name=p.stem)
