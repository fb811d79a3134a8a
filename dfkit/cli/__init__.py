"""The ``dfkit`` command: a thin shell over the public API.

One module per command (``check``, ``fix``, ``map``, ...); each has
``add_parser(subparsers)`` and ``run(args) -> int``, and is listed in
:data:`COMMANDS`. Shared option groups and reporting live in
:mod:`dfkit.cli.common`. The library speaks Python (``ValueError("sd= ...")``);
the shell speaks flags (``--sd``).

Exit status (all commands): 0 everything read and every fix ``ok``; 1 done, but
some rows were rejected or some fixes are flagged or failed (results are still
written); 2 the input cannot be read at all or the command is misused.
"""

from __future__ import annotations

import argparse
import gc
import sys

from dfkit import __version__
from dfkit.cli import calibrate, check, fix, map as map_cmd, plan, ranges, season
from dfkit.cli.common import option_message
from dfkit.observations.options import OptionError
from dfkit.problems import SheetError

#: The sub-commands, in the order ``dfkit --help`` lists them.
COMMANDS = [check, fix, map_cmd, calibrate, plan, season, ranges]


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="dfkit", description="Radio direction finding: bearings to positions "
                                "with honest confidence regions on WGS84.")
    p.add_argument("--version", action="version", version=f"dfkit {__version__}")
    sub = p.add_subparsers(dest="command", required=True)
    for cmd in COMMANDS:
        cmd.add_parser(sub).set_defaults(_run=cmd.run)
    return p


def main(argv=None) -> int:
    """Run the command line; returns the exit status.

    Called without ``argv`` it is the process's own command line (``dfkit ...``, ``python -m dfkit``): then the
    objects made by the imports (numpy's, pandas', ours: a few hundred thousand, all alive to the end) are moved
    out of the garbage collector's sight with :func:`gc.freeze`, so its full passes during a large sheet's run do
    not walk them again and again (about 0.3 s of 8 on 100,000 fixes; cyclic garbage made later is still
    collected). A caller that hands ``argv`` (a test, a notebook) keeps its collector as it is."""
    if argv is None:
        gc.freeze()
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: misuse (2) or --help/--version (0)
        return int(exc.code or 0)
    try:
        return args._run(args)
    except OptionError as err:   # the library names the parameter; the shell names the flag
        print(f"dfkit: {option_message(err)}", file=sys.stderr)
        return 2
    except SheetError as err:
        print(f"dfkit: {err}", file=sys.stderr)
        return 2
    except (ValueError, OSError) as err:
        print(f"dfkit: {err}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
