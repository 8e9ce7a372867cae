"""The ``workbench`` command: the window by default, headless subcommands otherwise.

Exit codes: 0 done, 2 bad input (one clear line on stderr, no traceback), 1 internal error.
Each subcommand lives in its own module under ``workbench.commands`` with ``register(sub)``.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import traceback

from workbench import __version__
from workbench.engine.errors import Cancelled, InputError

# Subcommand modules, in the order ``--help`` lists them.
COMMANDS = [
    "gui",
    "demo",
    "info",
    "case",
    "open",
    "rank",
    "effects",
    "pairs",
    "compare",
    "audit",
    "dossier",
    "batch",
]


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # argparse's own usage errors are bad input too: exit 2
        self.print_usage(sys.stderr)
        print(f"workbench: error: {message}", file=sys.stderr)
        raise SystemExit(2)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="workbench", description="Understand, check and sign off predictive models.")
    parser.add_argument("--version", action="version", version=f"workbench {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMANDS:
        importlib.import_module(f"workbench.commands.{name}").register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        args = parser.parse_args(["gui", *(argv or sys.argv[1:])])
    try:
        return int(args.run(args) or 0)
    except InputError as exc:
        print(f"workbench: error: {exc}", file=sys.stderr)
        return 2
    except Cancelled:
        print("workbench: cancelled", file=sys.stderr)
        return 130
    except KeyboardInterrupt:
        print("workbench: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception:  # noqa: BLE001 - anything else is our bug: say so, with the trace
        traceback.print_exc()
        print("workbench: internal error (a bug in workbench, not in your input); please report the trace above",
              file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
