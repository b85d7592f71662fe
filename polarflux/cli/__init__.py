"""The ``polarflux`` command: parses, calls the library, prints; nothing else.

Each sub-command lives in a module of this package; the library below knows
nothing of argument parsing.
"""

from __future__ import annotations

import sys

from ..errors import OutputExistsError, PolarfluxError
from ..maps import quiet_time_warnings
from ._common import EXIT_OK, EXIT_SOME_FAILED, EXIT_USAGE
from ._parser import build_parser, command_reference

__all__ = ["main", "build_parser", "command_reference", "EXIT_OK", "EXIT_SOME_FAILED", "EXIT_USAGE"]


def _handler(name: str):
    from . import _commands, _demo, _measure

    return {
        "measure": _measure.measure,
        "demo": _demo.demo,
        "transport": _commands.transport,
        "synth": _commands.synth,
        "events": _commands.events,
        "forecast": _commands.forecast,
        "plot": _commands.plot,
        "report": _commands.report,
        "hindcast": _commands.hindcast,
    }[name]


def main(argv: list[str] | None = None) -> int:
    """Run the command line ``argv`` (default: ``sys.argv[1:]``); return the exit status.

    0: done; 1: done, but some inputs failed (each was named); 2: bad usage or input,
    one line on stderr naming the file or option and the problem; 130: interrupted.
    """
    parser = build_parser()
    args = parser.parse_args(argv)
    name = args.command_name
    try:
        with quiet_time_warnings():
            return _handler(name)(args, args.command_parser)
    except OutputExistsError as exc:
        print(f"polarflux {name}: error: {exc} (add --force to replace it)", file=sys.stderr)
    except PolarfluxError as exc:
        print(f"polarflux {name}: error: {exc}", file=sys.stderr)
    except KeyboardInterrupt:
        print(f"polarflux {name}: interrupted; outputs not yet finished were not written", file=sys.stderr)
        return 130
    return EXIT_USAGE
