"""The ``orienteer`` command line: a thin layer over the Python API.

Each command lives in ``pipeline/commands/<name>.py`` and provides ``HELP`` (one line),
``add_arguments(parser)`` and ``run(args) -> int``. This module wires them up, reads
``--config`` TOML files (the command line wins) and turns exceptions into exit codes:
`InputError` -> 2 with one ``error:`` line, anything else -> 1 with the traceback in a log.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
import time
from collections.abc import Sequence
from pathlib import Path

from pipeline import __version__
from pipeline.errors import InputError, nearest_names

__all__ = ["main", "entry", "build_parser", "COMMANDS"]

#: Command names, in the order ``orienteer --help`` lists them.
COMMANDS = ("check", "learn", "sweep", "identify", "plan", "validate", "simulate", "compare",
            "demo")


def _command_module(name: str):
    return importlib.import_module(f"pipeline.commands.{name}")


class _HelpFormatter(argparse.HelpFormatter):
    """argparse's help layout, fitted to the window as argparse does (``COLUMNS``, else the
    terminal's width) without importing `shutil` (and the archive libraries it loads)."""

    def __init__(self, prog: str, **kwargs) -> None:
        if kwargs.get("width") is None:
            kwargs["width"] = _columns() - 2
        super().__init__(prog, **kwargs)


def _columns() -> int:
    columns = os.environ.get("COLUMNS", "")
    if columns.isdigit() and int(columns) > 0:
        return int(columns)
    try:
        columns = os.get_terminal_size(sys.__stdout__.fileno()).columns
    except (AttributeError, ValueError, OSError):
        columns = 0
    return columns if columns > 0 else 80  # 0: a terminal of unknown size


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """Return the argument parser with one sub-parser per available command.

    With `only` (a command name), the parser knows that command alone: a command line
    names one command, and building the others' sub-parsers costs a command's start.
    """
    parser = argparse.ArgumentParser(
        prog="orienteer",
        description="Orient the edges of a causal graph from control and perturbation experiments.",
        formatter_class=_HelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"orienteer {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name in COMMANDS if only is None else (only,):
        try:
            module = _command_module(name)
        except ModuleNotFoundError as exc:
            if exc.name == f"pipeline.commands.{name}":
                continue  # not built yet
            raise
        p = sub.add_parser(name, help=module.HELP, description=module.HELP,
                           formatter_class=_HelpFormatter)
        module.add_arguments(p)
        p.add_argument("--config", metavar="FILE",
                       help="TOML file of option values (keys are option names with _ for -); "
                            "the command line wins")
        p.add_argument("--debug", action="store_true", help="print tracebacks of internal faults")
        p.set_defaults(_module=module, _parser=p)
    return parser


def _apply_config(args: argparse.Namespace, rest: Sequence[str]) -> argparse.Namespace:
    """Re-parse `rest` (the words after the command) with ``--config`` values as defaults."""
    path = Path(args.config)
    if not path.is_file():
        raise InputError(f"--config {path}: no such file")
    import tomllib

    try:
        table = tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"--config {path}: not valid TOML ({exc})") from None
    for key, value in table.items():
        if isinstance(value, dict) and key not in COMMANDS:
            raise InputError(f"--config {path}: unknown section [{key}]; "
                             "sections are command names")
    # top-level keys apply to every command that has the option; a [command] table to that one
    values = {k: v for k, v in table.items() if not isinstance(v, dict)}
    values.update(table.get(args.command, {}))
    sub: argparse.ArgumentParser = args._parser
    known = {a.dest for a in sub._actions} - {"help", "config", "debug"}
    everywhere = _all_option_names()
    for key in values:
        if key not in known and key not in everywhere:
            raise InputError(f"--config {path}: unknown option '{key}'"
                             f"{nearest_names(key, sorted(known))}")
    sub.set_defaults(**{k: v for k, v in values.items() if k in known})
    new = sub.parse_args(list(rest))
    new.command = args.command
    return new


def _all_option_names() -> set[str]:
    """Every option name of every command (a config file may serve several commands)."""
    parser = build_parser()
    names: set[str] = set()
    for action in parser._subparsers._group_actions:  # type: ignore[union-attr]
        for sub in action.choices.values():
            names.update(a.dest for a in sub._actions)
    return names


def _crash_log(exc: BaseException) -> Path:
    import tempfile
    import traceback

    folder = Path(os.environ.get("ORIENTEER_LOG_DIR", tempfile.gettempdir()))
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"orienteer-fault-{time.strftime('%Y%m%d-%H%M%S')}-{os.getpid()}.log"
    path.write_text("".join(traceback.format_exception(exc)), encoding="utf-8")
    return path


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code (0 done, 1 internal fault, 2 input error)."""
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser(argv[0] if argv and argv[0] in COMMANDS else None)
    args = parser.parse_args(argv)  # argparse itself exits 2 on a bad command line
    debug = bool(getattr(args, "debug", False))
    from pipeline.provenance import running_command

    try:
        if getattr(args, "config", None):
            args = _apply_config(args, argv[argv.index(args.command) + 1:])
        with running_command(argv):
            return int(args._module.run(args) or 0)
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output not written through a Terminal met a closed pipe
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())  # no second fault when Python flushes at exit
        return 141  # 128 + SIGPIPE, as a shell reports a writer whose reader left
    except Exception as exc:  # noqa: BLE001 - every fault becomes exit 1 with a log
        if debug:
            import traceback

            traceback.print_exc()
        log = _crash_log(exc)
        print(f"internal fault: {type(exc).__name__}: {exc}\n"
              f"This is a bug in orienteer. The traceback is in {log} "
              f"(rerun with --debug to print it).", file=sys.stderr)
        return 1


def entry() -> None:
    """The ``orienteer`` program: run `main` on the command line, exit with its code.

    Before the interpreter exits, every object left is frozen (`gc.freeze`), so that its
    final garbage collection does not walk them all: with numpy, pandas and scipy loaded
    that walk takes a tenth of a second, for a process that ends anyway. Every output is
    written and closed by then; objects are still freed as the modules are cleared.
    """
    code = main()
    import gc

    gc.freeze()
    sys.exit(code)

