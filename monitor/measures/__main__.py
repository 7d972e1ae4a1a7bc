"""``python -m monitor.measures --readme README.md``: rewrite the README's measure table from the
registry (``--check``: exit 1 when it is out of date, without writing)."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from monitor.measures.catalog import with_readme_table


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m monitor.measures")
    parser.add_argument("--readme", type=Path, required=True, help="the README whose measures table to rewrite")
    parser.add_argument("--check", action="store_true", help="only report whether the table is up to date")
    args = parser.parse_args(argv)
    text = args.readme.read_text(encoding="utf-8")
    new = with_readme_table(text)
    if args.check:
        print("up to date" if new == text else f"{args.readme}: the measures table differs from the registry")
        return 0 if new == text else 1
    if new != text:
        args.readme.write_text(new, encoding="utf-8")
        print(f"{args.readme}: measures table rewritten")
    return 0


if __name__ == "__main__":
    sys.exit(main())
