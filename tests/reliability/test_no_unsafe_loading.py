"""Nothing read from disk is unpickled or evaluated: the package sources hold no such call.

A grep over ``solvers/``, ``surrogates/`` and ``suite/`` (this test file is
outside them, so its own patterns do not count).
"""

from __future__ import annotations

import re
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
PACKAGES = ("solvers", "surrogates", "suite")
FORBIDDEN = {
    "pickle.load": re.compile(r"\b(c?pickle|dill|cloudpickle|joblib)\.loads?\s*\("),
    "eval(": re.compile(r"(?<![\w.])eval\s*\("),
    "exec(": re.compile(r"(?<![\w.])exec\s*\("),
    "yaml.load": re.compile(r"\byaml\.(unsafe_)?load(_all)?\s*\("),
    "allow_pickle=True": re.compile(r"allow_pickle\s*=\s*True"),
    "marshal.loads": re.compile(r"\bmarshal\.loads?\s*\("),
    "shelve": re.compile(r"\bimport\s+shelve\b|\bshelve\.open\s*\("),
    "pandas.read_pickle": re.compile(r"\bread_pickle\s*\("),
    "torch.load": re.compile(r"\btorch\.load\s*\("),
}


def _sources():
    for pkg in PACKAGES:
        yield from sorted((REPO / pkg).rglob("*.py"))


def test_the_patterns_catch_what_they_are_meant_to():
    bad = ["x = pickle.load(fh)", "pickle.loads(b)", "eval(text)", "exec(code)", "yaml.load(s)",
           "np.load(p, allow_pickle=True)", "marshal.loads(b)", "import shelve", "pd.read_pickle(p)"]
    good = ["json.loads(s)", "np.load(p)", "self.evaluate(x)", "jax.eval_shape(f, x)", "tomllib.loads(t)",
            "def _eval(x):", "model.exec_time"]
    for line in bad:
        assert any(p.search(line) for p in FORBIDDEN.values()), line
    for line in good:
        assert not any(p.search(line) for p in FORBIDDEN.values()), line


def test_no_package_source_unpickles_or_evaluates():
    files = list(_sources())
    assert len(files) > 50  # the packages are really there
    hits = []
    for f in files:
        for n, line in enumerate(f.read_text(encoding="utf-8").splitlines(), 1):
            code = line.split("#", 1)[0]
            for name, pat in FORBIDDEN.items():
                if pat.search(code):
                    hits.append(f"{f.relative_to(REPO)}:{n}: {name}: {line.strip()}")
    assert not hits, "\n".join(hits)
