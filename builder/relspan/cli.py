"""The ``relspan`` command line: a thin face over :mod:`relspan`.

It parses arguments, calls the library, prints short human-readable output
and maps outcomes to exit codes:

* 0 - success (every claim holds);
* 1 - a claim failed (or, with ``--strict``, a warning was raised); ``verify``: something differs;
* 2 - bad input: spec, data, options or output folder (one located paragraph
  on stderr, never a traceback);
* 3 - an internal error (a bug of relspan's; one paragraph, traceback with RELSPAN_DEBUG=1);
* 130 - interrupted (Ctrl-C).
"""

from __future__ import annotations

import _thread
import argparse
import signal
import sys
import textwrap
import threading
import warnings
from pathlib import Path
from typing import Sequence

from relspan import __version__
from relspan.errors import OptionsError, RelspanError, RelspanNote, RelspanWarning

__all__ = ["main"]

EXIT_OK, EXIT_CLAIM_FAILED, EXIT_BAD_INPUT, EXIT_INTERNAL, EXIT_INTERRUPTED = 0, 1, 2, 3, 130


class _Parser(argparse.ArgumentParser):
    """argparse that reports usage errors as exit 2 with a one-paragraph message."""

    def error(self, message: str) -> None:  # pragma: no cover - argparse calls sys.exit
        self.exit(EXIT_BAD_INPUT, f"relspan: {message}\n  Fix: see `{self.prog} --help`.\n")


def _port(text: str) -> int:
    """A TCP port number, 0 (any free port) to 65535."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number; got {text!r}") from None
    if not 0 <= value <= 65535:
        raise argparse.ArgumentTypeError(
            f"must be from 0 (any free port) to 65535; got {value}")
    return value


def _add_run_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--jobs", "-j", type=int, default=None, metavar="N",
                   help="worker processes for window tasks (default: the spec's run.jobs, else the cores "
                        "available; 1 = serial); overrides the spec's run: section")
    p.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="run window tasks on an existing Dask cluster, e.g. tcp://10.0.0.5:8786 "
                        "(overrides the spec's run: section) "
                        "(needs `pip install 'relspan[cluster]'`)")
    p.add_argument("--no-cache", action="store_true",
                   help="recompute everything; do not read or write the result cache")
    p.add_argument("--cache-dir", default=None, metavar="DIR",
                   help="result cache folder (default: .relspan-cache beside the spec; safe to delete)")
    talk = p.add_mutually_exclusive_group()
    talk.add_argument("--quiet", "-q", action="store_true",
                      help="no progress bars on stderr (default: progress bars on a terminal only)")
    talk.add_argument("--verbose", "-v", action="store_true",
                      help="progress bars even when stderr is not a terminal (a log, CI), and where "
                           "the tasks ran and how long the run took")
    p.add_argument("--strict", action="store_true",
                   help="treat warnings (ill-conditioned windows, solver limits) as failures: exit 1")


def _parser() -> argparse.ArgumentParser:
    top = _Parser(
        prog="relspan",
        description="Say, reproducibly, how many linear relations error-ridden data pin down, "
                    "under which noise assumption, and whether that holds across windows.",
        epilog="Example: relspan build specs/demo.yaml",
    )
    top.add_argument("--version", action="version", version=f"relspan {__version__}")
    sub = top.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    b = sub.add_parser("build", help="analyse and write the site",
                       description="Run every analysis in SPEC, check its claims and write the site.",
                       epilog="Example: relspan build specs/demo.yaml --out /tmp/demo-site",
                       formatter_class=argparse.RawDescriptionHelpFormatter)
    b.add_argument("spec", help="the spec file (YAML)")
    b.add_argument("--out", default=None, metavar="DIR",
                   help="output folder (default: site.out in the spec, relative to the spec)")
    _add_run_options(b)

    c = sub.add_parser("check", help="validate, analyse and check claims; write nothing",
                       description="Validate SPEC and its data, run the analysis, evaluate the claims "
                                   "and print a verdict table. Writes nothing: an existing result cache "
                                   "is read, never written.",
                       epilog="Example: relspan check specs/demo.yaml")
    c.add_argument("spec", help="the spec file (YAML)")
    _add_run_options(c)

    for name, hidden in (("show", False), ("serve", True)):  # `serve`: the old name, hidden, for one release
        s = sub.add_parser(name, **({} if hidden else {"help": "serve a built site on 127.0.0.1, to read it in a browser"}),
                           description="Serve a built site folder on 127.0.0.1 only (never on other "
                                       "interfaces), on a free port unless --port says which. Stop with "
                                       "Ctrl-C." + (" (`serve` is the old name of `show`; it will be "
                                                    "removed in the next release.)" if hidden else ""),
                           epilog="Example: relspan show relspan-site")
        s.add_argument("folder", help="a folder written by `relspan build`")
        s.add_argument("--port", type=_port, default=0,
                       help="port on 127.0.0.1 (default 0: any free port, printed at start)")

    for name, hidden in (("draft", False), ("new", True)):  # `new`: the old name, hidden, for one release
        n = sub.add_parser(name, **({} if hidden else {"help": "write a draft spec for a data file"}),
                           description="Write a commented draft spec for a data file (CSV or TSV, "
                                       "compressed or not, Parquet, Excel .xlsx, Stata .dta): numeric "
                                       "columns as variables with units split from their names, a "
                                       "guessed time column (day-first dates detected), a full-sample "
                                       "and a rolling plan in time units, one example claim, and the "
                                       "columns it skipped; what was detected (separator, decimal mark, "
                                       "encoding, sheet) is written into it."
                                       + (" (`new` is the old name of `draft`; it will be removed in the "
                                          "next release.)" if hidden else ""),
                           epilog="Example: relspan draft data/regions.csv --out regions.yaml")
        n.add_argument("csv", metavar="DATA", help="the data file")
        n.add_argument("--out", default=None, metavar="SPEC",
                       help="where to write the spec (default: print it); an existing file is not "
                            "overwritten")

    v = sub.add_parser("verify", help="re-run a published site's analysis and compare every number",
                       description="Re-run the analysis of a published site from the spec and data it "
                                   "names: check the SHA-256 of every input, compare every published "
                                   "number within its stated precision and every claim verdict, and "
                                   "print a replication report (identical / within precision / "
                                   "different, per input, dataset and claim) with a one-line verdict. "
                                   "Exit 0: everything agrees; 1: something differs (named); 2: bad "
                                   "input.",
                       epilog="Example: relspan verify site_demo --spec specs/demo.yaml")
    v.add_argument("site", metavar="SITE", help="the folder of a site written by `relspan build`")
    v.add_argument("--spec", default=None, metavar="SPEC",
                   help="the spec to re-run (default: the file named like the site's published spec, "
                        "in this folder or one folder below)")
    v.add_argument("--jobs", "-j", type=int, default=1, metavar="N",
                   help="worker processes for the re-run (default 1: in this process)")
    v.add_argument("--quiet", "-q", action="store_true", help="print only the one-line verdict")

    sc = sub.add_parser("schema", help="print the spec's JSON Schema (or its reference in Markdown)",
                        description="Print the JSON Schema of spec format v1 (for editors that "
                                    "validate and complete YAML), or with --markdown the reference "
                                    "of every key (type, default, example), generated from the same "
                                    "schema.",
                        epilog="Example: relspan schema > relspan-spec.schema.json; "
                               "relspan schema --markdown > spec-reference.md")
    sc.add_argument("--markdown", action="store_true",
                    help="print the reference of every spec key in Markdown instead")
    return top


def _run_options(args: argparse.Namespace) -> dict:
    if args.jobs is not None and args.jobs < 1:
        raise OptionsError(f"--jobs must be a whole number >= 1; got {args.jobs}.",
                           key="--jobs", fix="use --jobs 1 for serial work, or leave it out.")
    return dict(jobs=args.jobs, scheduler=args.scheduler, use_cache=not args.no_cache,
                cache_dir=Path(args.cache_dir) if args.cache_dir else None,
                progress=False if args.quiet else (True if args.verbose else None),
                default_jobs=None)


class _Warnings(warnings.catch_warnings):
    """Record relspan's warnings for the end of the command; print notes at once (they come
    before long work, e.g. "this plan has 3,000 windows")."""

    def __init__(self) -> None:
        super().__init__()
        self.caught: list[warnings.WarningMessage] = []

    def __enter__(self) -> list[warnings.WarningMessage]:
        super().__enter__()
        warnings.simplefilter("always", RelspanWarning)
        warnings.simplefilter("always", RelspanNote)

        def show(message, category, filename, lineno, file=None, line=None):
            if issubclass(category, RelspanNote):
                print(f"note: {message}", file=sys.stderr, flush=True)
            else:
                self.caught.append(warnings.WarningMessage(message, category, filename, lineno,
                                                           file, line))

        warnings.showwarning = show
        return self.caught


def _print_warnings(caught: Sequence[warnings.WarningMessage]) -> int:
    count = 0
    for w in caught:
        if issubclass(w.category, RelspanWarning):
            count += 1
            print(f"warning: {w.message}", file=sys.stderr)
    return count


def _freeze_imports() -> None:
    """Keep the cyclic garbage collector off everything imported so far (``gc.freeze``).

    Modules, classes and functions live as long as the process, yet every full collection
    walked them again: 0.6 s of the demo's cold build, about half of it over these objects
    (docs/performance.md). Objects made afterwards are collected as before. Only the
    command-line program does this: relspan used as a library leaves its host's collector alone.
    """
    import gc

    gc.freeze()


def _cmd_build(args: argparse.Namespace) -> int:
    from relspan.api import build

    _freeze_imports()
    with _Warnings() as caught:
        outcome = build(args.spec, out=args.out, **_run_options(args))
    n_warn = _print_warnings(caught)
    print(outcome.verdict_table())
    print(f"site written to {outcome.out_dir}")
    _say_more(args, outcome)
    return _exit_for(outcome, n_warn, args.strict)


def _cmd_check(args: argparse.Namespace) -> int:
    from relspan.api import check

    _freeze_imports()
    with _Warnings() as caught:
        outcome = check(args.spec, **_run_options(args))
    n_warn = _print_warnings(caught)
    print(outcome.verdict_table())
    _say_more(args, outcome)
    return _exit_for(outcome, n_warn, args.strict)


def _say_more(args: argparse.Namespace, outcome) -> None:
    """--verbose: where the tasks ran, the cache and the time, on stderr."""
    if not args.verbose:
        return
    run = outcome.run
    where = outcome.where.split(" (")[0]
    # a plan ("in this process", "on 2 worker processes") reads after "analysed"; the automatic
    # choice names each stage ("analysis of d in this process: about ...; figures on ...")
    where = where if where.startswith(("in ", "on ", "nowhere")) else f"(ran {where})"
    print(f"relspan: {len(run.datasets)} dataset(s) analysed {where}; "
          f"result cache: {run.cache_hits} reused, {run.cache_misses} computed; "
          f"{outcome.seconds:.1f} s in all.", file=sys.stderr)


def _exit_for(outcome, n_warn: int, strict: bool) -> int:
    if not outcome.all_claims_hold:
        return EXIT_CLAIM_FAILED
    if strict and (n_warn or outcome.warnings):
        print(f"--strict: {n_warn or len(outcome.warnings)} warning(s) count as failure.", file=sys.stderr)
        return EXIT_CLAIM_FAILED
    return EXIT_OK


def _cmd_serve(args: argparse.Namespace) -> int:
    from relspan.site.serve import serve_folder

    serve_folder(Path(args.folder), port=args.port)
    return EXIT_OK


def _cmd_new(args: argparse.Namespace) -> int:
    from relspan.spec import starter_spec

    csv_path = Path(args.csv)
    spec_path = Path(args.out) if args.out else Path(csv_path.stem + ".yaml")
    text = starter_spec(csv_path, spec_path)
    if args.out is None:
        sys.stdout.write(text)
        return EXIT_OK
    if spec_path.exists():
        raise OptionsError(f"{spec_path} already exists; relspan does not overwrite it.",
                           path=str(spec_path), key="--out",
                           fix="choose another --out, or delete the file first.")
    tmp = spec_path.with_name(f".{spec_path.name}.relspan-tmp")
    try:
        tmp.write_text(text, encoding="utf-8")
        tmp.replace(spec_path)
    except OSError as err:
        try:
            tmp.unlink()
        except OSError:
            pass
        folder = spec_path.parent
        why = ("that folder does not exist" if not folder.exists() else
               f"{err.strerror or err}")
        raise OptionsError(f"cannot write the starter spec {spec_path}: {why}.", path=str(spec_path),
                           key="--out", fix="give --out a path in an existing folder you may write "
                                            "to, or create the folder first.") from None
    print(f"draft spec written to {spec_path}; next: relspan check {spec_path}")
    return EXIT_OK


def _cmd_verify(args: argparse.Namespace) -> int:
    from relspan.verify import verify

    if args.jobs is not None and args.jobs < 1:
        raise OptionsError(f"--jobs must be a whole number >= 1; got {args.jobs}.",
                           key="--jobs", fix="use --jobs 1 for serial work, or leave it out.")
    with _Warnings() as caught:
        rep = verify(Path(args.site), spec=args.spec, jobs=args.jobs, progress=False)
    _print_warnings(caught)
    print(rep.verdict() if args.quiet else rep.report())
    return EXIT_OK if rep.agrees else EXIT_CLAIM_FAILED


def _cmd_schema(args: argparse.Namespace) -> int:
    if args.markdown:
        from relspan.spec.docs import spec_reference_markdown

        text = spec_reference_markdown()
    else:
        from relspan.spec.schema import schema_json_text

        text = schema_json_text()
    sys.stdout.write(text if text.endswith("\n") else text + "\n")
    return EXIT_OK


class _CtrlC:
    """Make one Ctrl-C reach :func:`main` as a KeyboardInterrupt, wherever it lands.

    CPython prints and drops an exception raised inside a weakref callback or a
    ``__del__`` ("Exception ignored in ..."), so a Ctrl-C that lands there would be
    lost and the build would carry on. While a command runs, SIGINT raises
    KeyboardInterrupt and raises it again every second (``_thread.interrupt_main``)
    until one leaves the command; further Ctrl-C are then ignored while relspan exits.
    """

    def __init__(self) -> None:
        self._done = threading.Event()
        self._previous = None

    def __enter__(self) -> "_CtrlC":
        if threading.current_thread() is threading.main_thread():
            self._previous = signal.signal(signal.SIGINT, self._on_signal)
        return self

    def _on_signal(self, signum, frame) -> None:
        if self._done.is_set():
            return
        timer = threading.Timer(1.0, self._again)
        timer.daemon = True
        timer.start()
        raise KeyboardInterrupt

    def _again(self) -> None:
        if not self._done.is_set():
            _thread.interrupt_main()

    def __exit__(self, exc_type, exc, tb) -> None:
        self._done.set()
        if self._previous is not None:  # after an interrupt, ignore more while we clean up and exit
            interrupted = exc_type is not None and issubclass(exc_type, KeyboardInterrupt)
            signal.signal(signal.SIGINT, signal.SIG_IGN if interrupted else self._previous)


_COMMANDS = {"build": _cmd_build, "check": _cmd_check, "show": _cmd_serve, "serve": _cmd_serve,
             "draft": _cmd_new, "new": _cmd_new, "verify": _cmd_verify, "schema": _cmd_schema}


def _stderr_is_terminal() -> bool:
    import os

    try:
        return sys.stderr.isatty() and os.environ.get("TERM", "") != "dumb"
    except (AttributeError, ValueError, OSError):
        return False


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of ``relspan`` and ``python -m relspan``; returns the exit code."""
    parser = _parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help(sys.stderr)
        return EXIT_BAD_INPUT
    try:
        with _CtrlC():
            return _COMMANDS[args.command](args)
    except RelspanError as err:
        print(textwrap.indent(str(err), "").rstrip(), file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        # on a terminal, first clear a progress line the interrupt may have left unfinished
        clear = "\r\033[K" if _stderr_is_terminal() else ""
        print(f"{clear}relspan: interrupted; the previous site (if any) is unchanged.", file=sys.stderr)
        # A Ctrl-C that interrupted code run by exec(text) (dataclasses, during imports) leaves
        # CPython's "unhandled KeyboardInterrupt" flag set, and the interpreter would then end
        # by killing itself with SIGINT instead of exiting 130; evaluating any text resets it.
        exec("")  # noqa: S102 - a constant, empty program
        return EXIT_INTERRUPTED
    except BrokenPipeError:  # e.g. `relspan schema | head`
        return EXIT_OK
    except Exception as err:  # a bug of ours: say so in one paragraph, never a bare traceback
        import os
        import traceback

        if os.environ.get("RELSPAN_DEBUG"):
            traceback.print_exc()
        where = traceback.extract_tb(err.__traceback__)[-1]
        print(f"relspan: internal error ({type(err).__name__}: {err}) at {Path(where.filename).name}:"
              f"{where.lineno}. This is a bug in relspan, not in your input; the previous site (if any) "
              "is unchanged.\n  Fix: rerun with RELSPAN_DEBUG=1 for the traceback and report it.",
              file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
