"""The ``divides`` command line: the typer app and the mapping of failures to exit codes.

Exit codes: 0 done (also when the reader of stdout went away, as with
``divides screen DEM | head -1``: the outputs are written before anything is
printed); 2 bad input or usage (one line on stderr); 1 an internal error (one
line on stderr, the traceback in a log file in the temp directory); 130
interrupted. Commands live one per module and import numpy, rasterio and
numba inside their bodies, so that ``divides --help`` starts instantly.
"""

from __future__ import annotations

import datetime
import os
import platform
import sys
import tempfile
import traceback
import warnings
from collections.abc import Sequence
from typing import Annotated, NoReturn

import typer

from divides.cli import assess_cmd, demo_cmd, forecast_cmd, inspect_cmd, screen_cmd
from divides.cli.options import set_command
from divides.errors import DividesError, DividesWarning

try:  # typer >= 0.2x ships its own copy of click
    from typer._click.exceptions import ClickException, UsageError
except ImportError:  # pragma: no cover - older typer on top of click
    from click.exceptions import ClickException, UsageError

__all__ = ["app", "main", "run", "EXIT_OK", "EXIT_INTERNAL", "EXIT_USAGE", "EXIT_INTERRUPTED"]

EXIT_OK = 0
EXIT_INTERNAL = 1
EXIT_USAGE = 2
EXIT_INTERRUPTED = 130  # 128 + SIGINT, the shell convention

PROG = "divides"

app = typer.Typer(
    name=PROG,
    help="Is this drainage divide stable or moving? Read a DEM and find out.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    # Plain click help: no rich import at start-up, no colour codes in pipes.
    rich_markup_mode=None,
    context_settings={"help_option_names": ["-h", "--help"]},
)


def _print_version(value: bool) -> None:
    if value:
        from divides import __version__

        typer.echo(f"{PROG} {__version__}")
        raise typer.Exit(EXIT_OK)


@app.callback()
def _root(
    version: Annotated[
        bool,
        typer.Option("--version", callback=_print_version, is_eager=True, help="Print the version and exit."),
    ] = False,
) -> None:
    """Is this drainage divide stable or moving? Read a DEM and find out."""


app.command(name="demo")(demo_cmd.demo)
app.command(name="assess")(assess_cmd.assess)
app.command(name="forecast")(forecast_cmd.forecast)
app.command(name="inspect")(inspect_cmd.inspect)
app.command(name="screen")(screen_cmd.screen)


# ------------------------------------------------------------------ running
def _one_line(text: str) -> str:
    """Collapse a message to one line: the terminal gets one line per failure."""
    return " ".join(str(text).split()) or "(no message)"


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:  # noqa: ANN001
    # One line per warning, without the source line Python would print.
    kind = "" if issubclass(category, DividesWarning) else f"{category.__name__}: "
    print(f"{PROG}: warning: {kind}{_one_line(str(message))}", file=sys.stderr)


def _write_crash_log(exc: BaseException, argv: Sequence[str]) -> str:
    """Save the traceback of an internal error; return the log path."""
    fd, path = tempfile.mkstemp(prefix=f"{PROG}-error-", suffix=".log", text=True)
    from divides import __version__

    with os.fdopen(fd, "w", encoding="utf-8") as log:
        log.write(f"{PROG} {__version__} internal error, {datetime.datetime.now().isoformat(timespec='seconds')}\n")
        log.write(f"python {platform.python_version()} on {platform.platform()}\n")
        log.write(f"arguments: {list(argv)!r}\n\n")
        log.write("".join(traceback.format_exception(exc)))
    return path


def _usage_message(exc: UsageError) -> str:
    message = _one_line(exc.format_message()).rstrip(".")
    ctx = exc.ctx
    if ctx is None:
        return f"{PROG}: error: {message}"
    usage = _one_line(ctx.get_usage())
    return f"{PROG}: error: {message}; {usage[0].lower()}{usage[1:]} (see '{ctx.command_path} --help')"


def run(argv: Sequence[str] | None = None) -> int:
    """Run the command line and return its exit code (never raises, never exits).

    Parameters
    ----------
    argv : sequence of str, optional
        Arguments after the program name; ``sys.argv[1:]`` by default.

    Returns
    -------
    int
        0 done, 1 internal error, 2 bad input or usage, 130 interrupted.
    """
    args = list(sys.argv[1:] if argv is None else argv)
    set_command(args)  # recorded in the outputs' provenance
    try:
        with warnings.catch_warnings():
            # The command line decides how warnings look, whatever the caller's filters.
            warnings.simplefilter("default")
            warnings.showwarning = _show_warning
            result = app(args=args, prog_name=PROG, standalone_mode=False)
    except DividesError as exc:
        print(f"{PROG}: error: {_one_line(str(exc))}", file=sys.stderr)
        return EXIT_USAGE
    except UsageError as exc:
        if type(exc).__name__ == "NoArgsIsHelpError":
            # `divides` alone: the help is the most useful answer.
            print(exc.format_message(), file=sys.stderr)
        else:
            print(_usage_message(exc), file=sys.stderr)
        return EXIT_USAGE
    except ClickException as exc:  # e.g. an unreadable file named in an option
        print(f"{PROG}: error: {_one_line(exc.format_message())}", file=sys.stderr)
        return EXIT_USAGE
    except (KeyboardInterrupt, typer.Abort):
        return EXIT_INTERRUPTED
    except SystemExit:
        # click answers a closed stdout (EPIPE) by wrapping sys.stdout and exiting with 1: that is a
        # reader that went away, not a failure.
        if type(sys.stdout).__name__ == "PacifyFlushWrapper":
            sys.stdout = sys.__stdout__
            _silence_stdout()
            return EXIT_OK
        raise
    except BrokenPipeError:
        # The reader went away (`divides screen ... | head -1`): the work is done and written, so stop
        # quietly with success, and point stdout at devnull so that the final flush cannot fail again.
        _silence_stdout()
        return EXIT_OK
    except MemoryError:
        # The memory guard estimates the need before reading; this catches an estimate that was low.
        print(f"{PROG}: error: ran out of memory; work on a smaller window with --bounds "
              f"(or cap what divides plans for with DIVIDES_MEMORY_LIMIT)", file=sys.stderr)
        return EXIT_USAGE
    except Exception as exc:
        if isinstance(exc.__context__, BrokenPipeError) or isinstance(exc.__cause__, BrokenPipeError):
            _silence_stdout()  # a library wrapped the closed pipe in its own error
            return EXIT_OK
        try:
            where = f"with the log at {_write_crash_log(exc, args)}"
        except OSError as log_exc:
            where = f"(the log could not be written: {_one_line(str(log_exc))})"
        print(
            f"{PROG}: internal error: {type(exc).__name__}: {_one_line(str(exc))} "
            f"— this is a bug; please report it {where}",
            file=sys.stderr,
        )
        return EXIT_INTERNAL
    # typer returns the exit code of `typer.Exit` (e.g. 0 after --help), else the command's value.
    if isinstance(result, int) and not isinstance(result, bool):
        return result
    return EXIT_OK


def _silence_stdout() -> None:
    try:
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):  # stdout is not a real file
        pass


def main(argv: Sequence[str] | None = None) -> NoReturn:
    """Entry point of the ``divides`` console script and of ``python -m divides``."""
    code = run(argv)
    try:
        sys.stdout.flush()  # a closed pipe shows here, not in the interpreter's last words
    except BrokenPipeError:
        _silence_stdout()
    except (OSError, ValueError, AttributeError):
        pass
    sys.exit(code)
