"""The ``dynshare`` command line.

Sub-commands: ``extract``, ``check``, ``compare``, ``characterize``,
``demo`` (see the README).  Exit status 0 when every stage passes, 1 when at least one stage
fails its check, 2 for bad input or usage — then exactly one line
``error: ...`` goes to standard error, never a traceback.
"""

from __future__ import annotations

import argparse
import sys

from extract.errors import InputError, escaped

__all__ = ["main", "build_parser"]


class _Parser(argparse.ArgumentParser):
    """argparse with a one-line ``error:`` report and exit status 2."""

    def error(self, message):  # noqa: D102
        sys.stderr.write(f"error: {self.prog}: {escaped(message)[:200]} (see {self.prog} --help)\n")
        raise SystemExit(2)


def _layout_args(p):
    p.add_argument("layout", metavar="INPUT",
                   help="GDSII (.gds) or OASIS (.oas) layout, or a SPICE/CDL netlist (told apart by content)")
    p.add_argument("--tech", required=True, metavar="TECH", help="tech file (TOML)")
    p.add_argument("--cell", metavar="NAME", help="cell to read (default: the single top cell)")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="dynshare",
        description="Charge-sharing analysis of dynamic CMOS stages from layout. "
        "Results are estimates to guide design; sign-off needs foundry-qualified "
        "extraction and simulation.",
    )
    from extract.writers.numbers import tool_version

    parser.add_argument("--version", action="version", version=f"dynshare {tool_version()}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True

    p = sub.add_parser("extract", help="devices, nets and per-net capacitance")
    _layout_args(p)
    p.add_argument("--json", metavar="OUT", help="write the JSON report ('-' for stdout)")
    p.add_argument("--spice", metavar="OUT", help="write a SPICE subcircuit ('-' for stdout)")
    p.add_argument("--spef", metavar="OUT", help="write SPEF with lumped net capacitance ('-' for stdout)")

    p = sub.add_parser("check", help="extract, recognise dynamic stages, analyse charge sharing")
    _layout_args(p)
    p.add_argument("--constraints", metavar="FILE", help="input constraints (TOML)")
    p.add_argument("--json", metavar="OUT", help="write the JSON report ('-' for stdout)")
    p.add_argument("--html", metavar="OUT", help="write an HTML report")
    p.add_argument("--all-cells", action="store_true", help="check every cell of the library INPUT (layout or netlist)")
    p.add_argument("--simulate", action="store_true",
                   help="also simulate the worst cases with ngspice and the tech file's [models]")
    p.add_argument("--corner", action="append", metavar="C",
                   help="with --simulate: this corner of [models] corners (repeatable; default all)")
    p.add_argument("--jobs", type=int, metavar="N",
                   help="with --all-cells: cells in N parallel processes (default 1)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on the workers of the Dask distributed scheduler at ADDRESS (e.g. "
                        "tcp://host:8786): with --all-cells the cells (the input files must be visible to "
                        "the workers under the same path), else the distinct stage contexts of the cell "
                        "(the workers read no file). The JSON report is the same either way.")

    p = sub.add_parser("compare", help="pre-layout (schematic) against post-layout (layout)")
    _layout_args(p)
    p.add_argument("--schematic", required=True, metavar="NETLIST", help="SPICE netlist of the cell")
    p.add_argument("--constraints", metavar="FILE", help="input constraints (TOML)")
    p.add_argument("--json", metavar="OUT", help="write the JSON report ('-' for stdout)")
    p.add_argument("--html", metavar="OUT", help="write an HTML report")

    p = sub.add_parser(
        "characterize", help="fit a tech file's [mos.*] tables to the foundry models in its [models] table",
        description="Fit vt0, gamma, phi, kp, cox, cgo and the junction parameters of [mos.nmos] and "
        "[mos.pmos] to the SPICE models named in the tech file's [models] table, with ngspice, and write "
        "a complete tech file per corner. With one corner the file is OUT; with several, the corner goes "
        "before OUT's suffix (out.toml -> out.tt.toml, out.ss.toml). Results are cached in "
        "$DYNSHARE_CACHE (default ~/.cache/dynshare).")
    p.add_argument("--tech", required=True, metavar="TECH", help="tech file with a [models] table")
    p.add_argument("--out", required=True, metavar="OUT", help="the fitted tech file (one per corner, see above)")
    p.add_argument("--corner", action="append", metavar="C",
                   help="library section to fit (repeat for several; default: [models] corners, else the "
                        "whole library)")
    p.add_argument("--length", type=float, metavar="UM",
                   help="channel length in um (default: [models] length, else the shortest binned length)")
    p.add_argument("--width", type=float, metavar="UM", help="width of the threshold device in um (default 1)")
    p.add_argument("--temp", type=float, default=None, metavar="C",
                   help="temperature in C (default: [models] temperature, else 27); written to the output")
    p.add_argument("--json", metavar="OUT", help="write the fit results as JSON ('-' for stdout)")

    p = sub.add_parser("demo", help="the whole job on the bundled sample layouts")
    p.add_argument("--out", metavar="DIR", default="dynshare-demo", help="output folder (default ./dynshare-demo)")
    return parser


class _Stdout:
    """Standard output that fails as an input error: closed, full or gone
    becomes one ``error: <stdout>: ...`` line, not an internal error.  A
    reader that went away (a closed pipe) stays a BrokenPipeError."""

    def __init__(self, stream):
        self._stream = stream

    def _fail(self, exc) -> InputError:
        return InputError("<stdout>", f"cannot write to standard output: {getattr(exc, 'strerror', None) or exc}")

    def write(self, text):
        if self._stream is None:
            raise InputError("<stdout>", "cannot write to standard output: it is closed")
        try:
            return self._stream.write(text)
        except BrokenPipeError:
            raise
        except (OSError, ValueError) as exc:
            raise self._fail(exc) from None

    def flush(self):
        if self._stream is None:
            return
        try:
            self._stream.flush()
        except BrokenPipeError:
            raise
        except (OSError, ValueError) as exc:
            raise self._fail(exc) from None

    def __getattr__(self, name):
        return getattr(self._stream, name)


class _Stderr:
    """Standard error that never raises: when it is closed or full the
    message is lost, but the exit status still tells."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text):
        try:
            return self._stream.write(text) if self._stream is not None else len(text)
        except (OSError, ValueError, AttributeError):
            return len(text)

    def flush(self):
        try:
            if self._stream is not None:
                self._stream.flush()
        except (OSError, ValueError):
            pass

    def isatty(self):
        try:
            return bool(self._stream is not None and self._stream.isatty())
        except (OSError, ValueError):
            return False

    def __getattr__(self, name):
        return getattr(self._stream, name)


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    saved = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = _Stdout(sys.stdout), _Stderr(sys.stderr)
    try:
        code = _main(argv)
        try:
            sys.stdout.flush()
        except InputError as exc:
            sys.stderr.write(f"error: {exc.line()}\n")
            code = 2
        except BrokenPipeError:
            pass
        return code
    finally:
        sys.stdout, sys.stderr = saved


def _main(argv: list[str] | None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:
        return int(exc.code or 0) if not isinstance(exc.code, str) else 2
    try:
        from analyze.cli import commands

        return getattr(commands, f"run_{args.command}")(args)
    except InputError as exc:
        _flush_quietly()
        sys.stderr.write(f"error: {exc.line()}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("error: interrupted\n")
        return 2
    except BrokenPipeError:
        return 0
    except MemoryError:
        name = escaped(getattr(args, "layout", None) or getattr(args, "tech", None) or "dynshare")
        sys.stderr.write(f"error: {name}: out of memory (the input is too large for this machine; "
                         "see the work limits in the README)\n")
        return 2
    except Exception as exc:  # a bug: still one line, never a traceback
        what = " ".join(f"{type(exc).__name__}: {exc}".split())[:160]
        sys.stderr.write(f"error: dynshare {args.command}: internal error ({what}); please report it\n")
        return 2


def _flush_quietly() -> None:
    try:
        sys.stdout.flush()
    except (InputError, OSError):
        pass


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
