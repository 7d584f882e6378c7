"""Plan the row groups of a key-sorted Parquet file for a workload: the even file a writer makes
today, the advised cut within a row-group budget, the frontier of budgets, the held-out check.

Takes an open :class:`advisor.workload.Workload` (its histogram over the distinct keys), reads
the rows per key and a sample of the table through DuckDB, and gives a plain dict (the JSON the
CLI prints and the report draws)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import InputInvalid, InputNotFound, SettingInvalid
from ..histogram import Histogram
from ..workload import KEYS_TABLE, Workload, find_column, quote, table_sql
from .partition import Instance, best_by_count, best_within, instance, layers_fit
from .sizes import ByteModel, fit_model

EVEN_ROWS = 122_880  # DuckDB's own row group when it writes Parquet (measured: see DEVELOPERS.md)
MIN_ROWS = 1_000
LAYERED_MAX = 128  # budgets up to this many groups are solved layer by layer (exact)
FRONTIER = ("even", "1.5x", "2x", "4x", "none")


@dataclass(frozen=True)
class RowGroupOptions:
    columns: tuple[str, ...] | None = None  # what a lookup returns (None: every column)
    footer_cached: bool = False
    row_group_rows: int = EVEN_ROWS  # the even file's group size
    max_row_groups: str = "even"
    min_group_rows: int = MIN_ROWS
    frontier: bool = True
    order_column: str | None = None
    holdout: float = 0.2
    scan_to: str | None = None


@dataclass(frozen=True)
class Table:
    """The table's shape as the planner needs it."""

    columns: tuple[str, ...]  # every column, in table order
    rows_per_key: np.ndarray  # rows of each distinct key, in key order
    null_rows: int

    @property
    def rows(self) -> int:
        return int(self.rows_per_key.sum() + self.null_rows)


@dataclass(frozen=True)
class Traffic:
    """What the file answers: point lookups (a histogram) and range scans (first and last key
    rank of each scan's range, inclusive, and its weight; first = last + 1 when no key is inside)."""

    points: Histogram
    first: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    last: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    weight: np.ndarray = field(default_factory=lambda: np.zeros(0))

    @property
    def scans(self) -> float:
        return float(self.weight.sum())

    @property
    def total(self) -> float:
        return self.points.total + self.scans

    def instance(self, rows_per_key, tail, a, b, min_rows) -> Instance:
        scans = (self.first, self.last, self.weight) if self.weight.shape[0] else None
        return instance(self.points.p, self.points.q, rows_per_key, tail, a, b, min_rows, scans)


def budget_groups(spec: str, even_groups: int, max_groups: int) -> tuple[int, str]:
    """Groups a spec allows: ``even``, a ratio ``1.5x`` of the even file's groups, a count, or
    ``none`` (as many as the minimum group size permits)."""
    text = str(spec).strip().lower()
    if text == "even":
        return even_groups, "even"
    if text == "none":
        return max_groups, "none"
    try:
        if text.endswith("x"):
            ratio = float(text[:-1])
            if not ratio > 0 or not math.isfinite(ratio):
                raise ValueError
            return max(1, int(math.floor(ratio * even_groups + 1e-9))), text
        count = int(text)
        if count < 1:
            raise ValueError
        return count, text
    except ValueError:
        raise SettingInvalid(
            f"--max-row-groups must be even, a ratio such as 1.5x, a count of at least 1, or none; got {spec!r}"
        ) from None


def read_table(wl: Workload) -> Table:
    """Every column's name, the rows of each distinct key (DuckDB's key order) and NULL-key rows."""
    tsql = table_sql(wl.con, wl.table)
    cols = tuple(r[0] for r in wl.con.execute(f"DESCRIBE SELECT * FROM {tsql}").fetchall())
    k = quote(wl.key)
    got = wl.con.execute(f"SELECT count(*)::BIGINT AS c FROM {tsql} WHERE {k} IS NOT NULL GROUP BY {k} ORDER BY {k}")
    rows = np.asarray(got.fetchnumpy()["c"], dtype=np.float64)
    if rows.shape[0] != wl.hist.n:
        raise InputInvalid(f"the key column {wl.key!r} changed while it was read")
    return Table(cols, rows, int(wl.info.get("null_keys", 0)))


def chosen_columns(table: Table, key: str, names: tuple[str, ...] | None) -> tuple[str, ...]:
    """The key and the columns a lookup returns, each once, checked against the table."""
    if names is None:
        picked = list(table.columns)
    else:
        lookup = {c: c for c in table.columns}
        picked = []
        for name in names:
            try:
                picked.append(find_column(lookup, name.strip(), "the table"))
            except InputNotFound as e:
                raise InputNotFound(f"--columns: {e}") from None
    out = [key] + [c for c in picked if c != key]
    return tuple(dict.fromkeys(out))


def sample_tables(wl: Workload, table: Table) -> list:
    """Three runs of the table's own rows in key order (at 10%, 50% and 90% of the keys), as Arrow
    tables, for the byte model."""
    from .sizes import SAMPLE_GROUPS

    tsql = table_sql(wl.con, wl.table)
    k = quote(wl.key)
    want = sum(SAMPLE_GROUPS)
    n = wl.hist.n
    if table.rows <= 3 * want or n < 3:
        return [wl.con.sql(f"SELECT * FROM {tsql} ORDER BY {k} NULLS LAST").to_arrow_table()]
    out = []
    for share in (0.1, 0.5, 0.9):
        r = int(share * (n - 1))
        out.append(
            wl.con.sql(
                f"SELECT * FROM {tsql} WHERE {k} >= (SELECT k FROM {KEYS_TABLE} WHERE r = {r} LIMIT 1) "
                f"ORDER BY {k} LIMIT {want}"
            ).to_arrow_table()
        )
    return out


def group_reads(traffic: Traffic, S: np.ndarray, bounds: np.ndarray, per_group: np.ndarray) -> float:
    """Sum over lookups of ``per_group`` of every group each lookup reads, for any row cut.

    ``S`` is the prefix of rows per key (n + 1), ``bounds`` the groups' first rows and the file's
    row count (groups + 1). A hit reads every group holding a row of its key (an even cut can
    split a key's rows); a miss between keys g-1 and g reads the group holding both, if one does;
    a scan reads every group from the one holding its first key's first row to the one holding
    its last key's last row (a scan with no key inside, like a miss).
    """
    hist = traffic.points
    n = hist.n
    if n == 0:
        return 0.0
    first = np.searchsorted(bounds, S[:-1], side="right") - 1
    last = np.searchsorted(bounds, S[1:] - 1, side="right") - 1
    acc = np.zeros(per_group.shape[0] + 1)
    np.cumsum(per_group, out=acc[1:])
    same = last[:-1] == first[1:]
    inner = np.where(same, per_group[np.minimum(first[1:], per_group.shape[0] - 1)], 0.0)
    total = float(hist.p @ (acc[last + 1] - acc[first])) + float(hist.q[1:n] @ inner)
    if traffic.weight.shape[0]:
        f = np.clip(traffic.first, 0, n)
        la = np.clip(traffic.last, -1, n - 1)
        some = f <= la
        fi, li = np.minimum(f, n - 1), np.maximum(la, 0)
        ranged = np.where(some, acc[last[li] + 1] - acc[first[fi]], 0.0)
        gap_inner = np.zeros(n + 1)
        gap_inner[1:n] = inner
        total += float(traffic.weight @ np.where(some, ranged, gap_inner[f]))
    return total


def figures(traffic: Traffic, table: Table, bounds: np.ndarray, model: ByteModel) -> dict:
    """Expected bytes, rows and row groups per lookup or scan of one cut (NULL lookups excluded:
    no row group answers them), the footer, and the file's estimated size."""
    S = np.zeros(traffic.points.n + 1)
    np.cumsum(table.rows_per_key, out=S[1:])
    rows = np.diff(bounds).astype(np.float64)
    W = traffic.total
    G = rows.shape[0]
    footer = model.footer_bytes(G)
    if W <= 0:
        per = {"bytes": footer, "rows": 0.0, "groups": 0.0}
    else:
        per = {
            "bytes": footer + group_reads(traffic, S, bounds, model.group_bytes(rows)) / W,
            "rows": group_reads(traffic, S, bounds, rows) / W,
            "groups": group_reads(traffic, S, bounds, np.ones(G)) / W,
        }
    return {
        "row_groups": int(G),
        "expected_bytes": per["bytes"],
        "rows_per_lookup": per["rows"],
        "row_groups_per_lookup": per["groups"],
        "footer_bytes": footer,
        "file_bytes": model.file_bytes(rows),
        "smallest_group_rows": int(rows.min()) if G else 0,
        "largest_group_rows": int(rows.max()) if G else 0,
    }


def even_bounds(total_rows: int, group_rows: int) -> np.ndarray:
    """Row cuts of a writer that fills every group to ``group_rows`` (the last one partly)."""
    cuts = np.arange(0, total_rows, group_rows, dtype=np.int64)
    return np.append(cuts, total_rows) if total_rows else np.array([0, 0], dtype=np.int64)


def cut_bounds(inst: Instance, starts: np.ndarray) -> np.ndarray:
    return np.append(inst.S[starts], inst.total_rows).astype(np.int64)


@dataclass
class Solver:
    """The optimiser for one histogram and byte model: every budget of a run shares one layered
    solve (exact for every count up to its largest budget) and priced searches beyond it."""

    inst: Instance
    model: ByteModel
    weight: float
    _layers: list | None = None

    def total(self, cost: float, groups: int) -> float:
        return cost + self.weight * self.model.footer_bytes(groups)

    def best(self, G: int, layered_up_to: int) -> tuple[np.ndarray, float, float, bool]:
        """(starts, total, lower bound on the total, proven) for at most G groups."""
        if G <= layered_up_to:
            if self._layers is None or len(self._layers) <= G:
                self._layers = best_by_count(self.inst, layered_up_to)
            options = [(self.total(c.cost, c.groups), c) for c in self._layers[1 : G + 1] if c is not None]
            if not options:
                raise SettingInvalid(
                    f"no partition into at most {G} row groups meets --min-group-rows {self.inst.min_rows:,.0f}"
                )
            value, cut = min(options, key=lambda t: t[0])
            return cut.starts, value, value, True
        m = self.model
        per_group = 0.0 if m.footer_cached else self.weight * m.footer_per_group
        cut, bound = best_within(self.inst, G, per_group)
        value = self.total(cut.cost, cut.groups)
        if m.footer_cached:
            floor = bound
        else:  # footer_bytes(g) >= footer_fixed - 8 + per_group * g, and >= the 16 KiB tail read
            floor = bound + self.weight * (m.footer_fixed - 8)
            floor = max(floor, self.total(0.0, 1) + (bound - per_group * G if per_group else bound))
        floor = min(floor, value)
        return cut.starts, value, floor, value <= floor * (1 + 1e-9)


def plan_parquet(wl: Workload, opts: RowGroupOptions, on_step=None) -> dict:
    """The whole row-group analysis of one workload (see the module docstring)."""
    step = on_step or (lambda text: None)
    hist = wl.hist
    if hist.total <= 0:
        raise InputInvalid("the log holds no lookups of non-NULL values; nothing to plan for")
    traffic = Traffic(hist)
    if opts.scan_to:
        from ..logreads import load_scans

        step("reading the range scans")
        first, last, weight, points = load_scans(wl, opts.scan_to)
        traffic = Traffic(points, first, last, weight)
    step("reading rows per key and sampling the table for the byte model")
    table = read_table(wl)
    columns = chosen_columns(table, wl.key, opts.columns)
    model = fit_model(sample_tables(wl, table), columns, opts.footer_cached)
    inst = traffic.instance(table.rows_per_key, table.null_rows, model.a, model.b, opts.min_group_rows)
    total_rows = table.rows
    even = even_bounds(total_rows, opts.row_group_rows)
    model = replace(model, file_bytes_hint=model.file_bytes(np.diff(even)))
    even_groups = even.shape[0] - 1
    max_groups = max(1, int(total_rows // max(inst.min_rows, 1))) if inst.min_rows > 0 else max(1, hist.n)
    G, rule = budget_groups(opts.max_row_groups, even_groups, max_groups)
    G = min(G, max_groups, max(hist.n, 1))
    specs = [(G, rule)]
    if opts.frontier:
        for spec in FRONTIER:
            g, r = budget_groups(spec, even_groups, max_groups)
            g = min(g, max_groups, max(hist.n, 1))
            if r != rule and all(g != s[0] for s in specs):
                specs.append((g, r))
    specs.sort()
    layered = max([g for g, _ in specs if g <= LAYERED_MAX and layers_fit(inst, g)], default=0)
    solver = Solver(inst, model, traffic.total)
    step(f"optimising row groups ({len(specs)} budgets)")
    points = []
    chosen = None
    best_so_far = None
    for g, r in specs:
        starts, value, bound, proven = solver.best(g, layered)
        if best_so_far is not None and best_so_far[1] < value:  # more groups never worse
            starts, value = best_so_far
            proven = False
        best_so_far = (starts, value)
        fig = figures(traffic, table, cut_bounds(inst, starts), model)
        point = {
            "max_row_groups": g,
            "max_row_groups_rule": r,
            **fig,
            "lower_bound": bound / traffic.total,
            "proven_optimal": proven,
        }
        point["_starts"] = starts
        points.append(point)
        if r == rule:
            chosen = point
    even_fig = figures(traffic, table, even, model)
    plan = _plan_dict(chosen, even_fig, G, rule, opts)
    out = {
        "structure": "parquet",
        **_summary(hist, table),
        "scans": _whole(traffic.scans),
        "point_lookups": _whole(traffic.points.total + traffic.points.null_lookups),
        "byte_model": model.as_dict(),
        "plans": [plan],
        "frontier": [_public(p, even_fig) for p in points] if opts.frontier else [],
        "advised_first_keys": _first_keys(wl, chosen["_starts"]),
        "_advised_starts": chosen["_starts"],
        "_advised_groups": _group_table(inst, chosen["_starts"], traffic.total),
        "_writer": model.writer,
    }
    if opts.order_column and opts.holdout > 0:
        step("held-out check: fitting on the earlier part of the log")
        out["holdout"] = _holdout(wl, opts, table, model, even, G)
    out["advice"] = advice_sentences(out)
    out["warnings"] = hist.warnings()
    return out


def _group_table(inst: Instance, starts: np.ndarray, weight: float) -> tuple:
    """(starts, rows, lookup share) of each advised group, for the export."""
    ends = np.append(starts[1:], inst.n)
    rows = inst.S[ends] - inst.S[starts]
    rows[-1] += inst.tail
    share = (inst.U[ends] - inst.V[starts]) / weight if weight > 0 else np.zeros(starts.shape[0])
    return starts, rows, share


def _public(point: dict, even: dict) -> dict:
    p = {k: v for k, v in point.items() if not k.startswith("_")}
    p["ratio_to_even"] = even["expected_bytes"] / p["expected_bytes"] if p["expected_bytes"] > 0 else None
    return p


def _plan_dict(chosen: dict, even: dict, G: int, rule: str, opts: RowGroupOptions) -> dict:
    adv = {k: v for k, v in chosen.items() if k in even}
    u, o = even["expected_bytes"], adv["expected_bytes"]
    return {
        "model": "parquet",
        "budget": {"max_row_groups": G, "max_row_groups_rule": rule, "min_group_rows": opts.min_group_rows},
        "even_group_rows": opts.row_group_rows,
        "uniform": even,
        "optimized": adv,
        "saving": (u - o) / u if u > 0 else 0.0,
        "ratio": u / o if o > 0 else None,
        "lower_bound": chosen["lower_bound"],
        "proven_optimal": bool(chosen["proven_optimal"]),
    }


def _whole(x: float):
    return int(round(x)) if abs(x - round(x)) < 1e-9 else x


def _summary(hist: Histogram, table: Table) -> dict:
    s = hist.summary()
    whole = lambda x: int(round(x)) if abs(x - round(x)) < 1e-9 else x  # noqa: E731
    return {
        "keys": hist.n,
        "rows": table.rows,
        "null_key_rows": table.null_rows,
        "lookups": whole(s["lookups"]),
        "hits": whole(s["hits"]),
        "misses": whole(s["misses"]),
        "null_lookups": whole(s["null_lookups"]),
        "top_1pct_share": s["top_1pct_share"],
        "entropy_bits": s["entropy_bits"],
    }


def _first_keys(wl: Workload, starts: np.ndarray) -> list:
    """The first key of every advised group, in the key's own type (the split points)."""
    if starts.shape[0] == 0:
        return []
    ranks = ",".join(str(int(r)) for r in starts)
    rows = wl.con.execute(f"SELECT k FROM {KEYS_TABLE} WHERE r IN ({ranks}) ORDER BY r").fetchall()
    return [r[0] for r in rows]


def _holdout(wl: Workload, opts: RowGroupOptions, table: Table, model: ByteModel, even, G: int) -> dict:
    from ..logreads import load_split

    train, test = load_split(wl, opts.order_column, opts.holdout)
    if train.total <= 0 or test.total <= 0:
        return {"held_out_share": opts.holdout, "skipped": "one part of the log holds no lookups"}
    inst = instance(train.p, train.q, table.rows_per_key, table.null_rows, model.a, model.b, opts.min_group_rows)
    g = min(G, LAYERED_MAX) if layers_fit(inst, min(G, LAYERED_MAX)) else 0
    starts, *_ = Solver(inst, model, train.total).best(G, g)
    fit = figures(Traffic(train), table, cut_bounds(inst, starts), model)["expected_bytes"]
    fit_even = figures(Traffic(train), table, even, model)["expected_bytes"]
    later = figures(Traffic(test), table, cut_bounds(inst, starts), model)["expected_bytes"]
    later_even = figures(Traffic(test), table, even, model)["expected_bytes"]
    return {
        "held_out_share": opts.holdout,
        "fit": {"uniform": fit_even, "optimized": fit, "saving": 1 - fit / fit_even},
        "held_out": {"uniform": later_even, "optimized": later, "saving": 1 - later / later_even},
    }


def advice_sentences(run: dict) -> list[dict]:
    """The headline: bytes and row groups per lookup, even against advised, and whether the
    workload is clustered enough in key order for boundaries to matter."""
    plan = run["plans"][0]
    u, o = plan["uniform"], plan["optimized"]
    ratio = plan["ratio"] or 1.0
    if ratio >= 1.5:
        verdict = "hot keys sit together in key order, so the boundaries matter"
    elif ratio >= 1.1:
        verdict = "hot keys are partly clustered in key order; the cut helps somewhat"
    else:
        verdict = "hot keys are scattered in key order: at this budget boundaries change little"
    text = (
        f"Cut the file into {o['row_groups']:,} row groups as advised: {o['expected_bytes'] / 1024:,.0f} KiB and "
        f"{o['row_groups_per_lookup']:.2f} row groups per lookup against {u['expected_bytes'] / 1024:,.0f} KiB and "
        f"{u['row_groups_per_lookup']:.2f} for {u['row_groups']:,} even groups of {plan['even_group_rows']:,} rows "
        f"({ratio:.2f}x fewer bytes; modelled); {verdict}."
    )
    item = {"structure": "parquet", "text": text, "ratio": ratio, "saving": plan["saving"]}
    held = run.get("holdout", {}).get("held_out")
    if held:
        item["held_out_saving"] = held["saving"]
        item["text"] += (
            f" On the latest {run['holdout']['held_out_share']:.0%} of the log: {held['saving']:.1%} fewer bytes."
        )
    return [item]
