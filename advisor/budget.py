"""Space and height limits on a layout: what an engineer can actually build.

A limit is given as text (the CLI's ``--max-pages`` / ``--max-height``) and resolved per plan
against the even split of the same capacity:

* pages: ``even`` (no more pages than the even split), a ratio ``1.25x`` of the even split's
  pages, a whole page count, or ``none``;
* height: ``even`` (no taller than the even split), ``even+K``, a whole number of levels, or
  ``none``.

The default is ``even`` for both: advice that needs more disk or a longer worst case than the
index the engineer already builds is advice they cannot take without a second decision, and the
frontier (:mod:`advisor.frontier`) shows what more space would buy.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from .errors import SettingInvalid
from .layout import Layout

DEFAULT_PAGES = "even"
DEFAULT_HEIGHT = "even"


@dataclass(frozen=True)
class BudgetSpec:
    """The limits as asked for, before they meet a capacity."""

    pages: str = DEFAULT_PAGES
    height: str = DEFAULT_HEIGHT

    def __post_init__(self) -> None:
        _pages_rule(self.pages)
        _height_rule(self.height)

    @property
    def unlimited(self) -> bool:
        return self.pages == "none" and self.height == "none"


@dataclass(frozen=True)
class Budget:
    """Resolved limits for one plan; None means no limit."""

    max_pages: int | None
    max_height: int | None

    def allows(self, layout: Layout) -> bool:
        return self.violation(layout) is None

    def violation(self, layout: Layout) -> str | None:
        """Why ``layout`` breaks the limits, or None."""
        if self.max_pages is not None and layout.pages > self.max_pages:
            return f"{layout.pages} pages, allowed at most {self.max_pages}"
        if self.max_height is not None and layout.pages:
            height = int(layout.depths().max())
            if height > self.max_height:
                return f"{height} levels, allowed at most {self.max_height}"
        return None

    def as_dict(self) -> dict:
        return {"max_pages": self.max_pages, "max_height": self.max_height}


UNLIMITED = Budget(None, None)


def _pages_rule(text: str) -> tuple[str, float]:
    t = text.strip().lower()
    if t in ("even", "none"):
        return t, 1.0
    m = re.fullmatch(r"(\d+(?:\.\d+)?)x", t)
    if m:
        ratio = float(m.group(1))
        if ratio < 1.0:
            raise SettingInvalid(f"--max-pages ratio must be at least 1x of the even split, got {text!r}")
        return "ratio", ratio
    if t.isdigit() and int(t) >= 1:
        return "count", float(int(t))
    raise SettingInvalid(f"--max-pages must be even, none, a ratio such as 1.25x, or a page count; got {text!r}")


def _height_rule(text: str) -> tuple[str, int]:
    t = text.strip().lower().replace(" ", "")
    if t in ("even", "none"):
        return t, 0
    m = re.fullmatch(r"even\+(\d+)", t)
    if m:
        return "even", int(m.group(1))
    if t.isdigit() and int(t) >= 1:
        return "count", int(t)
    raise SettingInvalid(f"--max-height must be even, even+K, none, or a number of levels; got {text!r}")


def resolve(spec: BudgetSpec, even: Layout, min_pages: int, min_height: int, pages_note: str = "") -> Budget:
    """The limits for one plan, given its even split and the fewest pages / levels any layout of
    that capacity needs. An impossible limit is a :class:`SettingInvalid` (exit code 5)."""
    even_pages = even.pages
    even_height = int(even.depths().max()) if even.pages else 0
    kind, value = _pages_rule(spec.pages)
    if kind == "none":
        pages = None
    elif kind == "even":
        pages = even_pages
    elif kind == "ratio":
        pages = max(even_pages, int(math.floor(even_pages * value + 1e-9)))
    else:
        pages = int(value)
    hkind, extra = _height_rule(spec.height)
    height = None if hkind == "none" else (even_height + extra if hkind == "even" else extra)
    if pages is not None and pages < min_pages:
        need = pages_note or f"this index needs at least {min_pages}"
        raise SettingInvalid(f"--max-pages {spec.pages} allows {pages} pages; {need}")
    if height is not None and height < min_height:
        raise SettingInvalid(
            f"--max-height {spec.height} allows {height} levels; this index needs at least {min_height}"
        )
    return Budget(pages, height)
