"""The advice per page size and structure: one sentence a reader can act on, and its figures.

Built from the run's JSON dict (after every section is measured), so the terminal, the HTML
page and the JSON ``advice`` list say the same thing. A sentence answers, in this order:

* what it saves: the fit saving, and the held-out saving beside it when ``--order-column``
  split the log (the held-out figure is the one to believe: it was not fitted on);
* where it can be built: a classic layout (records in internal pages) and a B+ layout with
  leaves at several depths need an index written by hand (this project's index file is one);
  a B+ layout whose leaves sit at one depth suits an engine that lets the loader choose leaf
  boundaries; no engine takes a page layout from outside as it is;
* what the cache does to it: with ``--pool-bytes`` the index is compared with the pool; when
  the whole index fits, page reads are memory reads once warm, and the sentence leads with
  that instead of the saving in reads. Without ``--pool-bytes`` it says so.
"""

from __future__ import annotations

from .report_format import pct
from .structures import structure_for

DISCLAIMER = "Advice only: test any layout on a copy of your data before production use."

# A held-out saving below this share of the fit saving earns a warning (a round figure of this
# project's choosing: the workload drifted enough that half the fitted gain did not recur).
DRIFT_SHARE = 0.5


def _leafy(plan: dict) -> bool:
    """Whether the plan's structure keeps every key in leaves (asked of the structure, not its name)."""
    return structure_for(plan.get("model", "btree")).has_balanced_shape


def where_to_build(plan: dict) -> str:
    """The engines that can hold this layout, in plain words."""
    if _leafy(plan):
        depths = plan["optimized"].get("leaf_depths") or []
        if len(depths) <= 1:
            return (
                "every leaf sits at one depth: an engine that lets the loader choose where leaves "
                "end can hold it; this project's index file (advisor build) holds it as it is"
            )
        return (
            f"leaves sit at {len(depths)} depths, which engines with one leaf depth cannot hold: "
            "build it in an index you write yourself (advisor build writes one)"
        )
    return (
        "keys in internal pages with their records, which engines' B+-trees do not keep: build it "
        "in an index you write yourself (advisor build writes one)"
    )


def _held_out(run: dict, plan: dict) -> dict | None:
    """The held-out row of this plan (no smoothing), or None when the log was not split."""
    for row in (run.get("holdout") or {}).get("rows", []):
        same = row["keys_per_page"] == plan["keys_per_page"] and row["page_size"] == plan["page_size"]
        if same and row.get("model", "btree") == plan.get("model", "btree") and row.get("smoothing", 0) == 0:
            return row
    return None


def _size(n: int | None) -> str:
    if not n:
        return "?"
    for unit, scale in (("GiB", 2**30), ("MiB", 2**20), ("KiB", 2**10)):
        if n >= scale:
            return f"{n / scale:.1f} {unit}"
    return f"{n:,} bytes"


def advice_items(run: dict, pool_bytes: int | None) -> list[dict]:
    """One object per plan: ``text`` and the figures it was written from."""
    items = []
    for p in run["plans"]:
        o, u = p["optimized"], p["uniform"]
        what = "B+-tree" if _leafy(p) else "B-tree"
        where = f"{p['page_size']:,}-byte pages" if p["page_size"] else f"{p['keys_per_page']} keys per page"
        held = _held_out(run, p)
        held_saving = held["held_out"]["saving"] if held else None
        index_bytes = u.get("bytes")
        fits = None if not (pool_bytes and index_bytes) else bool(max(index_bytes, o.get("bytes") or 0) <= pool_bytes)
        pool = p.get("pool_equivalent") or {}
        item = {
            "model": p.get("model", "btree"),
            "page_size": p["page_size"],
            "keys_per_page": p["keys_per_page"],
            "saving": p["saving"],
            "held_out_saving": held_saving,
            "held_out_share": (run.get("holdout") or {}).get("fraction") if held else None,
            "build_in": where_to_build(p),
            "one_leaf_depth": _leafy(p) and len(o.get("leaf_depths") or []) <= 1,
            "index_bytes": index_bytes,
            "pool_bytes": pool_bytes,
            "fits_in_pool": fits,
            "even_pool_misses": pool.get("even_misses"),
            "advised_pool_misses": pool.get("advised_misses"),
        }
        head = f"{what}, {where}:"
        if o["expected_page_reads"] >= u["expected_page_reads"] - 1e-12:
            item["text"] = f"{head} keep the even split; nothing found within the budget reads fewer pages."
            items.append(item)
            continue
        saves = (
            f"{head} {pct(p['saving'])} fewer page reads per lookup ({u['expected_page_reads']:.3f} -> "
            f"{o['expected_page_reads']:.3f})"
        )
        if held_saving is not None:
            saves += f", {pct(held_saving)} on the latest {item['held_out_share']:.0%} of the log fitted on the rest"
        size = f" ({_size(o['bytes'])})" if o.get("bytes") else ""
        saves += f"; {o['pages']:,} pages{size}, {o['height']} levels."
        if fits:
            cache = (
                f"the whole index fits the {_size(pool_bytes)} pool: once warm every page read is a memory "
                "read, so the layout saves no I/O, only page visits"
            )
        elif pool_bytes and item["even_pool_misses"] is not None:
            cache = (
                f"with a {_size(pool_bytes)} pool ({pool.get('pool_pages', 0):,} pages, hottest pinned) it misses "
                f"{item['advised_pool_misses']:.3f} pages per lookup against {item['even_pool_misses']:.3f}"
            )
        elif not index_bytes:
            cache = "sized in keys per page only: give --page-size to weigh the index against a buffer pool"
        else:
            cache = (
                f"no --pool-bytes given; if your buffer pool holds the {_size(index_bytes)} index, these reads "
                "are memory reads"
            )
        item["saves"], item["cache"] = saves, cache
        balanced = p.get("balanced")
        if _leafy(p) and not item["one_leaf_depth"] and balanced:
            b = balanced["expected_page_reads"]
            item["balanced_saving"] = 1 - b / u["expected_page_reads"] if u["expected_page_reads"] > 0 else 0.0
            item["build_in"] += (
                f"; the balanced shape (one leaf depth, leaves cut for the pool) reads {b:.3f} per lookup, "
                f"{pct(item['balanced_saving'])} fewer than the even split"
            )
        lines = [saves, f"  build: {item['build_in']}.", f"  cache: {cache}."]
        if fits:
            lines = [lines[0], lines[2], lines[1]]  # the cache leads when it hides the saving
        item["text"] = "\n".join(lines)
        items.append(item)
    return items


def drift_warnings(run: dict) -> list[str]:
    """A held-out saving under half the fitted one: the hot keys moved, the advice may not last."""
    out = []
    for p in run["plans"]:
        held = _held_out(run, p)
        if held is None or p["saving"] <= 0:
            continue
        fit, later = held["in_sample"]["saving"], held["held_out"]["saving"]
        if fit > 0 and later < DRIFT_SHARE * fit:
            where = f"{p['page_size']:,}-byte pages" if p["page_size"] else f"c = {p['keys_per_page']}"
            out.append(
                f"{where} ({p.get('model', 'btree')}): the saving falls from {pct(fit)} on the earlier lookups to "
                f"{pct(later)} on the latest: the hot keys drift; re-plan often or expect less"
            )
    return out
