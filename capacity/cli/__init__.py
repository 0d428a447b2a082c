"""The ``capacity`` command: one program, one module per sub-command.

Each sub-command module exposes ``add_parser(subparsers)`` (registers its parser and sets ``func``) and
``run(args) -> int``. This layer parses, calls the library and writes; bad input (``InputError``) is printed
without a traceback and exits with status 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from capacity.errors import InputError

# sub-command name -> module (kept as a small table; modules are imported lazily so --help stays fast)
COMMANDS = {
    "check": "capacity.cli.check",
    "response": "capacity.cli.response",
    "rate": "capacity.cli.rate",
    "compare": "capacity.cli.compare",
    "optimise": "capacity.cli.optimise",
    "demo": "capacity.cli.demo",
    "sweep": "capacity.cli.sweep",
}


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="capacity",
        description=(
            "How much information a diffusion-based molecular communication layout can carry, "
            "and how to change it to carry more. Design-stage estimates only."
        ),
    )
    from capacity import __version__

    parser.add_argument("--version", action="version", version=f"capacity {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for module_name in COMMANDS.values():
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as exc:  # a stage not built yet
            if exc.name != module_name:
                raise
            continue
        module.add_parser(sub)
    return parser


def use_compilation_cache() -> None:
    """Keep JAX's compiled kernels between runs (JAX's persistent compilation cache) in the user's cache
    directory: ``$CAPACITY_CACHE_DIR``, else ``$XDG_CACHE_HOME/capacity/jax``, else ``~/.cache/capacity/jax``.
    Set ``CAPACITY_CACHE_DIR=off`` to switch it off. Must run before JAX is imported; the variables already set
    by the user win."""
    import os
    from pathlib import Path

    where = os.environ.get("CAPACITY_CACHE_DIR")
    if where == "off":
        return
    if not where:
        base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
        where = str(Path(base) / "capacity" / "jax")
    os.environ.setdefault("JAX_COMPILATION_CACHE_DIR", where)
    os.environ.setdefault("JAX_PERSISTENT_CACHE_MIN_COMPILE_TIME_SECS", "0")
    os.environ.setdefault("JAX_PERSISTENT_CACHE_MIN_ENTRY_SIZE_BYTES", "0")


def main(argv: list[str] | None = None) -> int:
    use_compilation_cache()
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except InputError as exc:
        print(f"capacity {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted; finished work was saved where the command says", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
