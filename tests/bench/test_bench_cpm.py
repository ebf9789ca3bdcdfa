"""Benchmark: the whole critical-path engine against networkx's longest path.

Run with ``pytest tests/bench/test_bench_cpm.py --bench -s``. A flow-line
network of 100,000 activities and 300,000 relations of mixed types with lags
on two calendars goes through the full engine (structural checks, Kahn's
order, forward and backward pass, floats, driving path). The same graph,
reduced to FS relations without lag, goes through networkx's
``dag_longest_path_length`` (graph building excluded). Target (issue "Walking
skeleton"): engine time ≤ 0.25 × networkx time, peak memory < 1 GiB.
"""

from __future__ import annotations

import datetime as dt
import statistics
import time
import tracemalloc

import networkx as nx
import numpy as np
import pytest

from scheduling.engine import WorkCalendar, build_network, critical_path

from .flowline import flowline_columns, flowline_network, fs_only

pytestmark = pytest.mark.bench

ACTIVITIES = 100_000
RELATIONS = 300_000
ROUNDS = 5


def _median_seconds(fn, rounds=ROUNDS):
    fn()  # warm-up: first-touch page faults and imports are not the engine
    times = []
    for _ in range(rounds):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), min(times)


def test_engine_is_at_most_a_quarter_of_networkx_longest_path():
    cols = flowline_columns(200, ACTIVITIES // 200, RELATIONS)
    assert len(cols["keys"]) == ACTIVITIES
    assert len(cols["rel_pred"]) == RELATIONS

    def engine():
        return critical_path(flowline_network(cols))

    engine_med, engine_min = _median_seconds(engine)

    fs = fs_only(cols)
    graph = nx.DiGraph()
    graph.add_nodes_from(range(ACTIVITIES))
    dur = np.asarray(cols["duration"])
    pred, succ = fs["rel_pred"], fs["rel_succ"]
    graph.add_weighted_edges_from(
        zip(pred.tolist(), succ.tolist(), dur[pred].tolist(), strict=True)
    )
    nx_med, nx_min = _median_seconds(lambda: nx.dag_longest_path_length(graph), 3)

    tracemalloc.start()
    result = engine()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()

    # The two sides compute the same thing on the FS reduction: with every day
    # a working day, the engine's latest early end equals networkx's longest
    # path plus the duration of the activity it ends on.
    every_day = WorkCalendar.from_names(
        "all", ["mon", "tue", "wed", "thu", "fri", "sat", "sun"]
    )
    fs_net = build_network(
        name="FS reduction",
        start=dt.date(2027, 3, 1),
        calendars=[every_day],
        **{**fs, "act_calendar": np.zeros(ACTIVITIES, dtype=np.int64)},
    )
    fs_graph = graph.copy()
    fs_graph.add_weighted_edges_from((v, "end", int(dur[v])) for v in range(ACTIVITIES))
    assert critical_path(fs_net).length == nx.dag_longest_path_length(fs_graph)

    ratio = engine_med / nx_med
    print(
        f"\ncpm benchmark: {ACTIVITIES:,} activities, {RELATIONS:,} relations, "
        f"{result.network.topology.generations} generations, "
        f"project {result.length} working days\n"
        f"  engine (checks + Kahn + passes + floats + path): median {engine_med:.3f} s"
        f" (min {engine_min:.3f})\n"
        f"  networkx dag_longest_path_length (FS, no lags): median {nx_med:.3f} s"
        f" (min {nx_min:.3f})\n"
        f"  ratio engine/networkx: {ratio:.3f} (target <= 0.25)\n"
        f"  engine peak traced memory: {peak / 2**20:.0f} MiB (target < 1024)"
    )
    assert ratio <= 0.25
    assert peak < 2**30
