"""The ``dfkit`` command: a thin shell over the public API.

One module per command (``check``, ``fix``, ``map``, ...); each has
``add_parser(subparsers)`` and ``run(args) -> int``, and is listed in
:data:`COMMANDS`. Shared option groups and reporting live in
:mod:`dfkit.cli.common`. The library speaks Python (``ValueError("sd= ...")``);
the shell speaks flags (``--sd``).

Exit status (all commands): 0 everything read and every fix ``ok``; 1 done, but
some rows were rejected or some fixes are flagged or failed (results are still
written); 2 the input cannot be read at all or the command is misused.

Imported before numpy (as the ``dfkit`` command and ``python -m dfkit`` do: the ``dfkit`` package itself loads
no numpy), this module caps the threads of numpy's linear-algebra library at one, unless the environment
already says how many (``OPENBLAS_NUM_THREADS``, ``MKL_NUM_THREADS``): OpenBLAS starts a thread per core when
numpy is loaded and they spin for a while, which cost about 0.1 s of CPU per run on a 2-core machine, while
dfkit's matrices are small (2x2 and 3x3 per fix; one row and column per observer or antenna in the offset
checks), done at once by one thread (``--jobs`` runs fixes in parallel instead); the outputs were byte for
byte the same with and without the cap on the bench sheet and every sample. Imported after numpy (a test, a
notebook), it changes nothing.
"""

from __future__ import annotations

import os
import sys

if "numpy" not in sys.modules:
    for _var in ("OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(_var, "1")

# after the cap above (E402: imports below code)
import argparse  # noqa: E402
import gc  # noqa: E402

from dfkit import __version__  # noqa: E402
from dfkit.cli import calibrate, check, fix, map as map_cmd, plan, ranges, season  # noqa: E402
from dfkit.cli.common import option_message  # noqa: E402
from dfkit.observations.options import OptionError  # noqa: E402
from dfkit.problems import SheetError  # noqa: E402

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
