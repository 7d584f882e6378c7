"""Page-size choice: the time formula by hand, the argmin, and the storage option."""

from __future__ import annotations

import json

import numpy as np
import pytest
from typer.testing import CliRunner

from advisor.cli import app, parse_storage
from advisor.errors import SettingInvalid
from advisor.geometry import geometry_for
from advisor.histogram import Histogram
from advisor.pagesize import StorageProfile, page_size_table
from advisor.planner import plan_capacity


@pytest.mark.slow  # several full runs: in the slow suite
def test_time_formula_and_choice():
    rng = np.random.default_rng(0)
    hist = Histogram(rng.integers(0, 50, 1500).astype(float), np.zeros(1501))
    plans = [plan_capacity(hist, g.capacity, g) for g in (geometry_for(s, 8) for s in (512, 4096))]
    prof = StorageProfile("t", 100.0, 100.0)  # 100 µs + 10 µs per 1000 bytes
    table = page_size_table(plans, hist, prof, pool_bytes=0)
    for row, plan in zip(table["rows"], plans, strict=False):
        per_read = 100.0 + plan.page_size / 100e6 * 1e6
        assert row["read_us"] == pytest.approx(per_read)
        assert row["optimized_us"] == pytest.approx(plan.recommended_cost.expected_page_reads * per_read)
        assert row["optimized_with_pool_us"] == pytest.approx(row["optimized_us"])  # no pool
    best = min(table["rows"], key=lambda r: r["optimized_us"])
    assert table["best_page_size"] == best["page_size"]


def test_storage_parsing():
    assert parse_storage("hdd").latency_us == 8000
    custom = parse_storage("50,1000")
    assert custom.latency_us == 50 and custom.bandwidth_mb_s == 1000
    for bad in ("fast", "1,0", "-1,5", "1,2,3"):
        with pytest.raises(SettingInvalid):
            parse_storage(bad)


def test_cli_page_size_choice(tmp_path):
    runner = CliRunner()
    res = runner.invoke(app, ["demo", "--dir", str(tmp_path), "--keys", "3000", "--lookups", "20000", "--json"])
    run = json.loads(res.stdout)
    choice = run["page_size_choice"]
    assert {r["page_size"] for r in choice["rows"]} == {4096, 8192, 16384}
    assert choice["best_page_size"] in (4096, 8192, 16384)
