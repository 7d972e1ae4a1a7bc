"""A ``levelfield`` command in a warm process, for the kill tests.

``python runner.py ARGS...`` imports everything the command needs, prints ``ready``, waits for one
line on stdin, then runs ``monitor.cli.main(ARGS)`` exactly as the console script does. The test
starts its clock at that line, so a kill lands in the command's work, not in Python's start-up.
Write transactions are marked on stdout (``@begin``, ``@commit``, ``@rollback``), and so is the
site's write step (``@write-begin``, ``@write-end``), so a test can aim a kill and tell where it
landed; the markers wrap :func:`store.transaction` and ``write_site`` without changing them.
"""

from __future__ import annotations

import contextlib
import os
import sys


def _marked(transaction):
    @contextlib.contextmanager
    def wrapper(db):
        os.write(1, b"@begin\n")
        try:
            with transaction(db) as conn:
                yield conn
        except BaseException:
            os.write(1, b"@rollback\n")
            raise
        os.write(1, b"@commit\n")

    return wrapper


def _marked_call(func, before: bytes, after: bytes):
    def wrapper(*args, **kwargs):
        os.write(1, before)
        result = func(*args, **kwargs)
        os.write(1, after)
        return result

    return wrapper


def main() -> None:
    import importlib

    args = sys.argv[1:]
    names = ["monitor.cli", "monitor.ingest.load", "monitor.ingest.mapping", "store.migrations"]
    if {"watch", "compute", "publish"} & set(args):
        names += ["monitor.compute", "monitor.flags", "monitor.plans", "monitor.watcher", "monitor.pipeline"]
    if {"watch", "publish"} & set(args):
        names += ["monitor.publish"]
    modules = [importlib.import_module(name) for name in names]
    for module in modules:
        if hasattr(module, "transaction"):
            module.transaction = _marked(module.transaction)
    if "publish" in names[-1]:
        build = importlib.import_module("monitor.publish.build")
        build.write_site = _marked_call(build.write_site, b"@write-begin\n", b"@write-end\n")
    os.write(1, b"ready\n")
    sys.stdin.readline()
    modules[0].main(args, prog_name="levelfield")


if __name__ == "__main__":
    main()
