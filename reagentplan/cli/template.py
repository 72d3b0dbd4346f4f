"""``reagentplan template PATH``: the blank, annotated scenario workbook."""

from __future__ import annotations

from .common import EXIT_OK


def register(sub) -> None:
    p = sub.add_parser("template", help="write the blank, annotated scenario workbook")
    p.add_argument("path", help="where to write the .xlsx")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..template import write_template

    path = write_template(args.path)
    print(f"Wrote the blank scenario workbook to {path}")
    return EXIT_OK
