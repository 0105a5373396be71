"""Commands about the program itself: ``serve`` (the web dashboard) and ``bench`` (benchmarks)."""

from __future__ import annotations

import argparse
import math
import sys
from pathlib import Path
from typing import Any

from posebridge.cli.common import EXIT_OK, print_json
from posebridge.cli.options import SharedOptions

DEFAULT_CELL = "demo-cell.json"


def _cmd_serve(args: argparse.Namespace) -> int:
    from posebridge.api.server import check_host, run_server
    from posebridge.resources import demo_working_folder

    check_host(args.host, share=args.share)
    if args.cell:
        cell_path = Path(args.cell)
    else:
        cell_path = demo_working_folder() / DEFAULT_CELL
        print(f"demo cell: working copy {cell_path} (delete it to start afresh)")
    run_server(host=args.host, port=args.port, cell_path=cell_path, share=args.share)
    return EXIT_OK


def _cmd_bench(args: argparse.Namespace) -> int:
    from posebridge.bench.runner import run_benchmarks

    figures = run_benchmarks(
        quick=args.quick, progress=None if args.json else _bench_progress, only=args.only or ()
    )
    if args.json:
        print_json(
            {k: (v if isinstance(v, str) or math.isfinite(v) else None) for k, v in figures.items()}
        )
        return EXIT_OK
    width = max(len(k) for k in figures)
    for key, value in figures.items():
        print(f"{key:<{width}}  {value if isinstance(value, str) else format(value, ',.4g')}")
    return EXIT_OK


def _bench_progress(name: str) -> None:
    print(f"measuring {name} ...", file=sys.stderr, flush=True)


def add_serve(sub: Any, shared: SharedOptions) -> None:
    """``posebridge serve [--cell] [--host] [--port] [--share]``."""
    command = sub.add_parser("serve", help="run the web dashboard (loopback only unless --share)")
    command.add_argument(
        "--cell", help="cell file (default: a working copy of the bundled demo cell)"
    )
    command.add_argument("--host", default="127.0.0.1", help="address to bind (default 127.0.0.1)")
    command.add_argument("--port", type=int, default=8000, help="port (default 8000, 0 = any free)")
    command.add_argument(
        "--share", action="store_true", help="allow a non-loopback bind for a read-only review"
    )
    command.set_defaults(run=_cmd_serve)


def add_bench(sub: Any, shared: SharedOptions) -> None:
    """``posebridge bench [--quick] [--json] [--only WORD]``."""
    command = sub.add_parser("bench", help="measure throughput and speed ratios")
    command.add_argument("--quick", action="store_true", help="smaller problems, same keys")
    command.add_argument(
        "--only",
        action="append",
        metavar="WORD",
        help="run only the benchmarks whose name contains WORD (repeatable), e.g. dashboard",
    )
    command.add_argument(
        "--json", action="store_true", help="print one flat JSON object of numbers"
    )
    command.set_defaults(run=_cmd_bench)
