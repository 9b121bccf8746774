"""Kill the current process with SIGKILL at a chosen moment of the store's work (test helper).

``arm(conn, store_path, spec)`` installs the trigger on an open SQLite
connection; ``spec`` is ``"stmt:<n>"`` (just before the n-th SQL statement
this connection executes: inside a transaction, at its COMMIT, or between
transactions, depending on ``n``) or ``"wal"`` (as soon as the store's WAL
file grows, i.e. while or right after a commit writes its frames; a thread
polls its size).

Run as a script, ``python -m reliability.kill_hook SPEC lyapbench-args...``
runs the real ``lyapbench`` command line in this process with every store
it opens armed with ``SPEC``. The product knows nothing of this module.
"""

from __future__ import annotations

import os
import signal
import sys
import threading


def _die() -> None:
    os.kill(os.getpid(), signal.SIGKILL)


def arm(conn, store_path, spec: str) -> None:
    kind, _, arg = spec.partition(":")
    if kind == "stmt":
        target, seen = int(arg), [0]

        def on_statement(_sql):
            seen[0] += 1
            if seen[0] == target:
                _die()

        conn.set_trace_callback(on_statement)
    elif kind == "wal":
        wal = f"{store_path}-wal"

        def size():
            try:
                return os.stat(wal).st_size
            except OSError:
                return -1

        start = size()

        def watch():
            while size() <= start:
                pass
            _die()

        threading.Thread(target=watch, daemon=True).start()
    else:
        raise ValueError(f"unknown kill spec {spec!r}")


def main(argv) -> int:
    spec, args = argv[0], argv[1:]
    from suite.cli import main as cli_main
    from suite.store import Store

    original = Store.open.__func__

    def open_armed(cls, path, **kwargs):
        store = original(cls, path, **kwargs)
        if kwargs.get("lock"):
            arm(store._conn, path, spec)
        return store

    Store.open = classmethod(open_armed)
    return cli_main(args)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
