"""Helpers shared by the subcommands: arguments, the analysis object, warnings and output
(standard library at import; the analysis is imported only when a command runs)."""

from __future__ import annotations

import argparse
from pathlib import Path


def add_site(parser: argparse.ArgumentParser) -> None:
    """The positional site file."""
    parser.add_argument("site", type=Path, metavar="SITE.toml", help="the site file")


def add_json(parser: argparse.ArgumentParser) -> None:
    """``--json``: print one JSON document on stdout instead of text."""
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def add_out(parser: argparse.ArgumentParser) -> None:
    """``--out DIR``: where tables and figures go."""
    parser.add_argument(
        "--out", type=Path, default=None, metavar="DIR", help="write tables and figures to DIR"
    )


def add_seed(parser: argparse.ArgumentParser) -> None:
    """``--seed N``: overrides the site file's seed."""
    parser.add_argument("--seed", type=int, default=None, help="random seed (default: site file)")


def add_progress(parser: argparse.ArgumentParser) -> None:
    """``--no-progress``: no progress bar on stderr (one is shown only on a terminal)."""
    parser.add_argument("--no-progress", action="store_true", help="no progress bar on stderr")


def open_lake(args: argparse.Namespace, **settings):
    """The analysis object of the command's site file, seeded from ``--seed`` when given, with
    a progress bar when the command has ``--no-progress``, it is not given and stderr is a
    terminal."""
    import sys

    from ..analysis import open_site

    if hasattr(args, "no_progress") and "progress" not in settings:
        settings["progress"] = not args.no_progress and sys.stderr.isatty()
    seed = getattr(args, "seed", None)
    return open_site(args.site, seed=seed, **settings)


def output_folder(args: argparse.Namespace, lake, *extra_inputs):
    """The ``--out`` folder of a command as an :class:`~lakebalance.io.output.OutputFolder`
    (None without ``--out``), checked before any work: it must not hold the site's inputs
    (nor ``extra_inputs``, e.g. a compared survey)."""
    if getattr(args, "out", None) is None:
        return None
    from ..io.output import OutputFolder, site_inputs

    inputs = [*site_inputs(lake.site), *(p for p in extra_inputs if p is not None)]
    return OutputFolder(args.out, inputs=inputs)


class LakebalanceWarnings:
    """Collect lakebalance's warnings raised inside a ``with`` block, to be stated once each.

    Other libraries' warnings are passed on as they came.
    """

    def __enter__(self) -> list[str]:
        import warnings

        self._ctx = warnings.catch_warnings(record=True)
        self._seen = self._ctx.__enter__()
        warnings.simplefilter("always")
        self.messages: list[str] = []
        return self.messages

    def __exit__(self, *exc) -> None:
        import warnings

        from ..errors import LakebalanceWarning

        self._ctx.__exit__(*exc)
        other = []
        for w in self._seen:
            if issubclass(w.category, LakebalanceWarning):
                self.messages.append(str(w.message))
            else:
                other.append(w)
        self.messages[:] = list(dict.fromkeys(self.messages))
        for w in other:  # someone else's warning: as it came
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)


def formatter(lake):
    """The display of a site's human output: ``[report] units`` and its stage resolution."""
    from ..report.build import formatter as _formatter

    return _formatter(lake)


def wrap(text: str, width: int = 120, indent: str = "") -> str:
    """A long line of prose folded to ``width`` characters (the terminal tables' width)."""
    import textwrap

    return textwrap.fill(text, width, subsequent_indent=indent or "  ")


def fold_long_lines(text: str, width: int = 120) -> str:
    """Each line of ``text`` longer than ``width`` folded at words, its continuation indented
    two more than the line; shorter lines (tables) as they are."""
    import textwrap

    out = []
    for line in str(text).split("\n"):
        if len(line) <= width:
            out.append(line)
            continue
        lead = line[: len(line) - len(line.lstrip())]
        out.append(
            textwrap.fill(line.strip(), width, initial_indent=lead, subsequent_indent=lead + "  ")
        )
    return "\n".join(out)


class FoldedStream:
    """A text stream that folds the long lines written to it (:func:`fold_long_lines`)."""

    def __init__(self, stream, width: int = 120) -> None:
        self.stream, self.width, self._pending = stream, width, ""

    def write(self, text: str) -> int:
        self._pending += text
        *done, self._pending = self._pending.split("\n")
        for line in done:
            self.stream.write(fold_long_lines(line, self.width) + "\n")
        return len(text)

    def flush(self) -> None:
        if self._pending:
            self.stream.write(fold_long_lines(self._pending, self.width))
            self._pending = ""
        self.stream.flush()


def emit(args: argparse.Namespace, lake, doc: dict, summary: object, written: list) -> None:
    """Print a result as one JSON document (``--json``) or as its text summary."""
    site, seed = lake.site, lake.seed
    if args.json:
        from .._json import dumps

        doc = {**doc, "site": site.site.name, "seed": seed, "written": [str(p) for p in written]}
        print(dumps(doc))
    else:
        print(f"{site.site.name} (seed {seed})")
        print(fold_long_lines(str(summary)))
        for p in written:
            print(f"wrote {p}")


def add_step_arguments(parser: argparse.ArgumentParser) -> None:
    """The arguments of a command that shows one step: the site file, ``--json``, ``--out`` and
    ``--seed``."""
    add_site(parser)
    add_json(parser)
    add_out(parser)
    add_seed(parser)


def run_step(args: argparse.Namespace, step: str, write) -> int:
    """A command that shows one step of the analysis: compute ``step`` once (its warnings go
    into its own notes), write its files with ``write(out, result)`` (a list of paths) when
    ``--out`` is given, then print its summary or its JSON."""
    lake = open_lake(args)
    out = output_folder(args, lake)
    with LakebalanceWarnings():  # the step's own notes carry them
        result = getattr(lake, step)
    written = [] if out is None else write(out, result)
    emit(args, lake, result.to_dict(), result.summary(), written)
    return 0
