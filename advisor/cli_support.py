"""What every command shares: one-line errors with their exit codes, Ctrl-C, small parsers."""

from __future__ import annotations

import sys
from contextlib import contextmanager
from pathlib import Path

import duckdb
import typer
from rich.console import Console

from . import interrupt
from .errors import AdvisorError, InputInvalid, InputNotFound, SettingInvalid, UsageError
from .pagesize import PROFILES, StorageProfile


def warn(lines: list[str]) -> None:
    """One line on stderr per option that has no effect in this run (the run goes on)."""
    console = Console(stderr=True, highlight=False)
    for line in lines:
        console.print(f"advisor: warning: {line}", markup=False, soft_wrap=True)


def fail(message: str, code: int) -> None:
    Console(stderr=True, highlight=False).print(f"advisor: error: {message}", markup=False, soft_wrap=True)
    raise typer.Exit(code)


@contextmanager
def guard():
    """One line and a distinct exit code for every failure; never a traceback."""
    try:
        with interrupt.armed():
            yield
        if interrupt.interrupted():  # a library swallowed the signal: still answer it
            raise KeyboardInterrupt
    except AdvisorError as e:
        fail(str(e), e.exit_code)
    except (KeyboardInterrupt, duckdb.InterruptException):
        interrupted()
    except typer.Exit:
        raise
    except MemoryError:
        fail("out of memory; try fewer page sizes or a smaller table", 1)
    except Exception as e:  # noqa: BLE001 - the promise is no traceback
        if "interrupted" in str(e).lower():  # DuckDB turns Ctrl-C inside a query into its own error
            interrupted()
        fail(f"internal error ({type(e).__name__}): {e}", 1)


def interrupted() -> None:
    Console(stderr=True, highlight=False).print(interrupt.message(), markup=False, soft_wrap=True)
    raise typer.Exit(130)


def read_query(path: Path | None) -> str | None:
    """The text of a --log-sql file (None without one)."""
    if path is None:
        return None
    try:
        return Path(path).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputNotFound(f"--log-sql file not found: {path}") from None
    except (OSError, UnicodeDecodeError) as e:
        raise InputInvalid(f"cannot read --log-sql file {path}: {e}") from None


def parse_storage(text: str) -> StorageProfile:
    """A named profile, or 'latency_us,mb_per_s' for a custom one."""
    if text in PROFILES:
        return PROFILES[text]
    try:
        lat, bw = (float(x) for x in text.split(","))
    except ValueError:
        raise SettingInvalid(
            f"--storage must be one of {', '.join(PROFILES)} or LATENCY_US,MB_PER_S, got {text!r}"
        ) from None
    if lat < 0 or bw <= 0:
        raise SettingInvalid("--storage latency must be >= 0 and bandwidth > 0")
    return StorageProfile("custom", lat, bw)


def check_model(model: str, keys_per_page, fanout) -> None:
    if model not in ("btree", "bplus", "both", "parquet"):
        raise UsageError(f"--model must be btree, bplus, both or parquet, got {model!r}")
    if model in ("bplus", "both") and keys_per_page and not fanout:
        raise SettingInvalid("--model bplus with --keys-per-page needs --fanout")


def need_log(log, log_sql) -> None:
    """A run without a lookup log has nothing to fit: a usage error, not an empty report."""
    if log is None and log_sql is None:
        raise UsageError("give the lookup log: --log TABLE|FILE, or --log-sql FILE")


# the command-line library's validation wording, said plainly
_PLAIN = (
    ("Input should be a valid integer, unable to parse string as an integer", "not a whole number"),
    ("Input should be a valid integer", "not a whole number"),
    ("Input should be a valid number, unable to parse string as a number", "not a number"),
    ("Input should be a valid number", "not a number"),
    ("Input should be a valid boolean", "not true or false"),
)


def usage_line(message: str, command: str | None) -> str:
    """One line for a usage error: the problem in plain words and where help is."""
    text = " ".join(message.split())
    for theirs, ours in _PLAIN:
        text = text.replace(theirs, ours)
    where = f"advisor {command} --help" if command else "advisor --help"
    return f"advisor: error: {text.rstrip('.')} (see {where})"


def run_app(app, args: list[str] | None = None) -> int:
    """Run the Typer app with usage errors as one line on stderr and exit code 2 (the library's
    own framed boxes take five lines); everything else as the commands answer it."""
    try:
        rv = app(args=args, standalone_mode=False)
    except Exception as e:  # the vendored click's UsageError family, by shape
        if not (hasattr(e, "format_message") and hasattr(e, "exit_code")):
            raise
        ctx = getattr(e, "ctx", None)
        if type(e).__name__ == "NoArgsIsHelpError" and ctx is not None:
            print(ctx.get_help())
            return 0
        command = ctx.info_name if ctx is not None and ctx.parent is not None else None
        sys.stderr.write(usage_line(e.format_message(), command) + "\n")
        return int(e.exit_code) if e.exit_code else 2
    return rv if isinstance(rv, int) else 0
