"""The ``probwrap`` command line.

Verbs are registered by the modules of this package; each adds a sub-parser and sets
``func(args) -> int``. Exit codes: 0 success, 2 usage error (argparse), 1 a problem that stops
the command (bad data, a file that cannot be written, a missing optional dependency), reported
in one line that names the file, column or row and the problem. 130 after Ctrl-C, 143 after
SIGTERM; an interrupted command leaves every output file as it was before. 1, without a
traceback, when the reader of the output stops early (``| head``).
"""

from __future__ import annotations

import argparse
import contextlib
import difflib
import errno
import importlib
import os
import re
import signal
import sys

from ._common import (
    INPUT_OPTIONS,
    OPTIONAL_MODULES,
    DataError,
    StandardStream,
    clean,
    missing_extra_message,
    set_running_verb,
)

__all__ = ["main", "DataError"]

#: modules that register verbs, in the order they appear in ``--help``
_VERB_MODULES = ("_demo", "_calibrate", "_cutoff", "_prevalence", "_report_verb")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every available verb."""
    parser = argparse.ArgumentParser(
        prog="probwrap",
        description="Calibrated probabilities, least-expected-cost decisions and base-rate "
        "shift, from the command line.",
    )
    from probwrap._version import __version__

    parser.add_argument("--version", action="version", version=f"probwrap {__version__}")
    sub = parser.add_subparsers(dest="verb", metavar="VERB")
    sub.required = True
    for name in _VERB_MODULES:
        try:
            module = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{name}":
                continue  # verb not available in this version
            raise
        module.register(sub)
    for each in _parsers(parser):
        # an option is named in full: argparse would otherwise take any unambiguous prefix
        # (``--cost`` for ``--cost-matrix`` in one verb, an error in another, and a prefix
        # that stops being unambiguous when a verb gains an option); a prefix is refused with
        # the options it could mean (:func:`_option_hints`)
        each.allow_abbrev = False
        for action in each._actions:
            _match_choices(action)
    return parser


def _parsers(parser: argparse.ArgumentParser) -> list[argparse.ArgumentParser]:
    """``parser`` and every sub-parser below it, each once."""
    found: dict[int, argparse.ArgumentParser] = {}
    todo = [parser]
    while todo:
        current = todo.pop()
        if id(current) in found:
            continue
        found[id(current)] = current
        for action in current._actions:
            if isinstance(action, argparse._SubParsersAction):
                todo.extend(action.choices.values())
    return list(found.values())


def _choice_key(text: str) -> str:
    """What two spellings of a choice share: case and '-' / '_' do not matter."""
    return text.strip().casefold().replace("_", "-")


def choice_matcher(choices: tuple[str, ...] | list[str]):
    """An argparse ``type`` that turns a choice written in another case, or with '_' for '-'
    (or the reverse), into the choice as the option lists it (``EM`` -> ``em``,
    ``Log_Odds`` -> ``log-odds``); any other text is refused naming every allowed value, and the
    nearest one when there is one.

    Examples
    --------
    >>> match = choice_matcher(("em", "bbse", "log-odds"))
    >>> match("EM"), match("log_odds"), match("bbse")
    ('em', 'log-odds', 'bbse')
    >>> match("emm")
    Traceback (most recent call last):
    ...
    argparse.ArgumentTypeError: invalid choice: 'emm' (choose from em, bbse, log-odds; case does not matter); did you mean em?
    """
    by_key = {_choice_key(c): c for c in choices}

    def parse(text: str) -> str:
        found = by_key.get(_choice_key(text))
        if found is not None:
            return found
        close = difflib.get_close_matches(_choice_key(text), list(by_key), n=1, cutoff=0.6)
        hint = f"; did you mean {by_key[close[0]]}?" if close else ""
        raise argparse.ArgumentTypeError(
            f"invalid choice: {clean(text)!r} (choose from {', '.join(choices)}; case does not "
            f"matter){hint}")

    return parse


def _match_choices(action: argparse.Action) -> None:
    """Give an option whose choices are words :func:`choice_matcher` as its type."""
    if (isinstance(action, argparse._SubParsersAction) or not action.choices
            or action.type is not None
            or not all(isinstance(c, str) for c in action.choices)):
        return
    action.type = choice_matcher(tuple(action.choices))


class _Terminated(BaseException):
    """Raised in the main thread on SIGTERM, so that partial outputs are cleaned up."""


def _on_sigterm(signum, frame):  # pragma: no cover - exercised in a subprocess test
    raise _Terminated


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit code.

    When the reader of standard output goes away early (``probwrap ... | head -1``), the rest
    of the output is dropped quietly and the exit code is 1 (no traceback).
    """
    try:
        try:
            return _run(argv)
        finally:  # inside the try: output still buffered is written, or fails, here
            sys.stdout.flush()
    except BrokenPipeError:
        # as the Python documentation advises: point stdout at devnull so that the flush at
        # interpreter exit does not fail once more
        with contextlib.suppress(AttributeError, OSError, ValueError):
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
        return 1


#: options that take a number or a cost matrix, whose value may start with '-' (a gain)
_NUMBER_OPTIONS = frozenset({
    "--cost-fp", "--cost-fn", "--cost-tp", "--cost-tn", "--cost-matrix", "--capacity",
    "--confidence", "--seed", "--source-prevalence", "--horizon", "--alarm-reference",
    "--alarm-decision-interval", "--guarantee-target", "--guarantee-confidence", "--resamples",
    "--folds", "--batch-size", "--bins", "--n-train",
})
_NEGATIVE_VALUE = re.compile(r"-\.?\d")


def join_negative_values(argv: list[str]) -> list[str]:
    """``--cost-fp -1e-1`` as ``--cost-fp=-1e-1``: argparse takes a value that starts with '-'
    for an option unless it is a plain number such as ``-5`` or ``-0.5``, so ``-1e-1`` or a cost
    matrix ``"-5,4,12;30,4,12"`` stopped with "expected one argument".

    Examples
    --------
    >>> join_negative_values(["cutoff", "--cost-fp", "-1e-1", "--cost-matrix", "-5,4;3,0"])
    ['cutoff', '--cost-fp=-1e-1', '--cost-matrix=-5,4;3,0']
    >>> join_negative_values(["--title", "-1 day", "--scores", "-data.csv"])
    ['--title', '-1 day', '--scores', '-data.csv']
    """
    out: list[str] = []
    i = 0
    while i < len(argv):
        token = argv[i]
        if token == "--":  # the rest is not options
            return out + argv[i:]
        if (token in _NUMBER_OPTIONS and i + 1 < len(argv)
                and _NEGATIVE_VALUE.match(argv[i + 1])):
            out.append(f"{token}={argv[i + 1]}")
            i += 2
            continue
        out.append(token)
        i += 1
    return out


def _standard_input(args: argparse.Namespace, parser: argparse.ArgumentParser) -> None:
    """Swap every input file given as ``-`` for a :class:`StandardStream` (read from standard
    input, named "standard input" in messages); two of them is a usage error, since standard
    input can be read only once."""
    given = [dest for dest in INPUT_OPTIONS if getattr(args, dest, None) == "-"]
    if len(given) > 1:
        named = " and ".join(INPUT_OPTIONS[d] for d in given)
        parser.error(f"{named} are both '-': standard input can be read only once; give all "
                     "but one of them as a file")
    for dest in given:
        setattr(args, dest, StandardStream())


def _verb_parser(parser: argparse.ArgumentParser, argv: list[str]) -> argparse.ArgumentParser:
    """The innermost sub-parser ``argv`` names (``calibrate fit`` -> its parser)."""
    current = parser
    for token in argv:
        subs = [a for a in current._actions if isinstance(a, argparse._SubParsersAction)]
        if not subs:
            break
        if token in subs[0].choices:
            current = subs[0].choices[token]
    return current


def _option_hints(names: list[str], token: str) -> str:
    """What a long option the verb does not have may have meant: every option it begins
    (abbreviated names are not taken), else the nearest names (a misspelling), else ""."""
    name = token.split("=", 1)[0]
    starting = [o for o in names if o.startswith(name)] if len(name) > 2 else []
    if starting:
        listed = (", ".join(starting[:-1]) + " or " + starting[-1]) if len(starting) > 1 \
            else starting[0]
        return (f"{name} is not an option, and options are not abbreviated: did you mean "
                f"{listed}?")
    folded = [o for o in names if o.casefold() == name.casefold()]
    close = folded or difflib.get_close_matches(name, names, n=2, cutoff=0.75)
    if close:
        return f"{name}: did you mean {' or '.join(close)}?"
    return ""


def _unknown_options(parser: argparse.ArgumentParser, argv: list[str],
                     unknown: list[str]) -> None:
    """Refuse arguments no option of the verb takes, with the verb's usage (not the top-level
    ``probwrap VERB ...``) and, for a long option, the options it may have meant: those it
    begins (``--cost`` -> ``--cost-fp``, ..., ``--cost-matrix``; abbreviations are not taken)
    or the nearest names of a misspelling (``--capacty`` -> ``--capacity``); exits with code 2."""
    verb = _verb_parser(parser, argv)
    names = [o for a in verb._actions for o in a.option_strings if o.startswith("--")]
    hints = [h for h in (_option_hints(names, t) for t in unknown if t.startswith("--")) if h]
    hints += _quote_hints(verb, argv, unknown)
    message = "unrecognized arguments: " + " ".join(unknown)
    if hints:
        message += " (" + "; ".join(hints) + ")"
    verb.error(message + f"; '{verb.prog} --help' lists the options")


def _quote_hints(verb: argparse.ArgumentParser, argv: list[str],
                 unknown: list[str]) -> list[str]:
    """For words left over right after an option's value (``--score-column forest score``: a
    column name with a space, not quoted in the shell), the option with the words quoted."""
    takes_one = {o for a in verb._actions if a.nargs is None and a.option_strings
                 and not isinstance(a, argparse._SubParsersAction)
                 and a.const is None and not isinstance(a, argparse._StoreConstAction)
                 for o in a.option_strings}
    stray = {t for t in unknown if not t.startswith("-")}
    hints = []
    for j, token in enumerate(argv[:-2]):
        if (token not in takes_one or argv[j + 1].startswith("-")
                or re.search(r"\.(csv|tsv|txt|parquet|pq|json|html?|gz|bz2|xz|zip)$",
                             argv[j + 1], flags=re.IGNORECASE)):
            continue  # (a whole file name, then another: two files, not one name split)
        end = j + 2
        while end < len(argv) and argv[end] in stray:
            end += 1
        if end > j + 2:
            words = " ".join(argv[j + 1:end])
            hints.append(f"if {words!r} is one value of {token}, put it in quotes: "
                         f"{token} \"{words}\"")
    return hints


def _check_option_names(parser: argparse.ArgumentParser, argv: list[str]) -> None:
    """Refuse a long option the verb does not have before parsing (through
    :func:`_unknown_options`): parsing first would stop at a required option the misspelt one
    was meant to be ("the following arguments are required: --cost-fp" for ``--cost-f 5``),
    without the hint. The values after it (up to the next option) are named with it."""
    current = parser
    unknown: list[str] = []
    taking = False  # the tokens after an unknown option, up to the next option
    for token in argv:
        if token == "--":
            break
        subs = [a for a in current._actions if isinstance(a, argparse._SubParsersAction)]
        if subs and token in subs[0].choices:
            current, taking = subs[0].choices[token], False
            continue
        if token.startswith("--") and " " not in token:  # argparse reads "--a b" as a value
            names = {o for a in current._actions for o in a.option_strings}
            taking = token.split("=", 1)[0] not in names
            if taking:
                unknown.append(token)
        elif token.startswith("-") and not _NEGATIVE_VALUE.match(token):
            taking = False
        elif taking:
            unknown.append(token)
    if unknown:
        _unknown_options(parser, argv, unknown)


def _verb_names(parser: argparse.ArgumentParser, argv: list[str]) -> list[str]:
    """``argv`` with each verb written as the parser lists it (``Cutoff`` -> ``cutoff``,
    ``calibrate FIT`` -> ``calibrate fit``: verbs, like choices, are read whatever their case)."""
    out = list(argv)
    current = parser
    for i, token in enumerate(out):
        if token == "--":
            break
        subs = [a for a in current._actions if isinstance(a, argparse._SubParsersAction)]
        if not subs:
            return out
        if token.startswith("-"):
            continue
        by_key = {name.casefold(): name for name in subs[0].choices}
        name = by_key.get(token.strip().casefold())
        if name is None:
            return out  # argparse names the wrong verb and the choices
        out[i] = name
        current = subs[0].choices[name]
    return out


def _need_verb(parser: argparse.ArgumentParser, argv: list[str]) -> None:
    """A usage error listing the verbs when ``argv`` names none where one is needed
    (``probwrap``, ``probwrap calibrate``), unless help or the version is asked for."""
    current = _verb_parser(parser, argv)
    subs = [a for a in current._actions if isinstance(a, argparse._SubParsersAction)]
    if subs and not {"-h", "--help", "--version"} & set(argv):
        what = subs[0].metavar or "VERB"
        current.error(f"give a {what}: one of {', '.join(subs[0].choices)} "
                      f"('{current.prog} --help' says what each does)")


def _run(argv: list[str] | None) -> int:
    parser = build_parser()
    argv = join_negative_values([str(a) for a in (sys.argv[1:] if argv is None else argv)])
    argv = _verb_names(parser, argv)
    _check_option_names(parser, argv)
    _need_verb(parser, argv)
    args, unknown = parser.parse_known_args(argv)
    if unknown:
        _unknown_options(parser, argv, unknown)
    _standard_input(args, parser)
    previous = None
    try:
        previous = signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:  # not in the main thread: leave signals alone
        previous = None
    try:
        set_running_verb(str(args.verb))
        from ._tables import set_csv_encoding

        set_csv_encoding(getattr(args, "encoding", None))
        return int(args.func(args) or 0)
    except DataError as exc:
        print(f"probwrap {args.verb}: error: {clean(' '.join(str(exc).split()))}",
              file=sys.stderr)
        return 1
    except ModuleNotFoundError as exc:
        root = (exc.name or "").split(".")[0]
        if root not in OPTIONAL_MODULES:
            raise
        print(f"probwrap {args.verb}: error: {missing_extra_message(root)}", file=sys.stderr)
        return 1
    except OSError as exc:
        if exc.filename is None:  # not about a path (a broken pipe, ...): handled above
            raise
        # a path the system refuses before any file is opened (a name over 255 bytes, ...)
        hint = ("; a file or folder name may hold at most 255 bytes (and a whole path about "
                "4096): shorten it") if exc.errno == errno.ENAMETOOLONG else ""
        print(f"probwrap {args.verb}: error: {clean(str(exc.filename))}: "
              f"{exc.strerror or clean(str(exc))}{hint}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print(f"probwrap {args.verb}: interrupted; files are replaced only when complete, so "
              "no output was left half-written", file=sys.stderr)
        return 130
    except _Terminated:
        print(f"probwrap {args.verb}: terminated; files are replaced only when complete, so "
              "no output was left half-written", file=sys.stderr)
        return 143
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
        if getattr(args, "encoding", None) is not None:
            from ._tables import set_csv_encoding

            set_csv_encoding(None)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
