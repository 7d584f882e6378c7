"""What every command shares: one-line errors with their exit codes, Ctrl-C, small parsers."""

from __future__ import annotations

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
