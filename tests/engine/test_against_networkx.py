"""The critical path of finish-to-start networks, checked against networkx.

On a 7-day calendar every day is a working day, so working-day positions are
plain days and the project length of a finish-to-start, zero-lag network is
the longest path through the activity graph. networkx
(``networkx.dag_longest_path_length``, a general-purpose graph library) gives
that length independently: each relation ``pred → succ`` is an edge weighted
by the predecessor's duration, and every activity also has an edge to a
super-sink weighted by its own duration.
"""

from __future__ import annotations

import datetime as dt

import networkx as nx
import numpy as np
import pytest

from scheduling.engine import FS, WorkCalendar, build_network, critical_path

from .builders import ALL_DAYS

SEVEN_DAYS = WorkCalendar.from_names("all", ALL_DAYS)
START = dt.date(2027, 3, 1)
SINK = "__sink__"
SEEDS = range(30)


def random_fs_network(seed: int, min_duration: int = 0):
    """A random finish-to-start DAG, activities listed in a shuffled order.

    Returns the engine network and the networkx graph with the super-sink.
    """
    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 301))
    duration = rng.integers(min_duration, 16, size=n)
    # ``topo[k]`` is the activity at place k of a hidden topological order;
    # the document lists activities 0..n-1, so the order is not given away.
    topo = rng.permutation(n)
    pairs = set()
    for k in range(1, n):
        for _ in range(int(rng.integers(0, 4))):
            j = int(rng.integers(max(0, k - 25), k))
            pairs.add((int(topo[j]), int(topo[k])))
    pred = np.array([p for p, _ in sorted(pairs)], dtype=np.int64)
    succ = np.array([s for _, s in sorted(pairs)], dtype=np.int64)
    m = len(pred)
    keys = [f"A{i:03d}" for i in range(n)]
    net = build_network(
        name=f"networkx seed {seed}",
        start=START,
        calendars=[SEVEN_DAYS],
        keys=keys,
        duration=duration,
        rel_pred=pred,
        rel_succ=succ,
        rel_type=np.full(m, FS),
        rel_lag=np.zeros(m, dtype=np.int64),
        rel_calendar_days=np.zeros(m, dtype=bool),
        act_calendar=np.zeros(n, dtype=np.int64),
    )
    graph = nx.DiGraph()
    graph.add_nodes_from(keys)
    for p, s in zip(pred.tolist(), succ.tolist(), strict=True):
        graph.add_edge(keys[p], keys[s], weight=int(duration[p]))
    for i, key in enumerate(keys):
        graph.add_edge(key, SINK, weight=int(duration[i]))
    return net, graph


def start_position(result) -> int:
    t = result.tables
    return t.position(0, t.day_index(result.network.start))


@pytest.mark.parametrize("seed", SEEDS)
def test_fs_length_equals_networkx_longest_path(seed):
    net, graph = random_fs_network(seed)
    result = critical_path(net)
    latest_end = int(
        (result.early_start_pos + net.duration).max() - start_position(result)
    )
    # Reference: networkx.dag_longest_path_length on the graph with a super-sink.
    assert latest_end == nx.dag_longest_path_length(graph, weight="weight")


@pytest.mark.parametrize("seed", SEEDS)
def test_fs_finish_date_equals_networkx_longest_path_without_milestones(seed):
    # With every duration at least one day the finish date is the last day of
    # the longest path: start + length - 1 (the finish is inclusive).
    net, graph = random_fs_network(seed, min_duration=1)
    result = critical_path(net)
    # Reference: networkx.dag_longest_path_length on the graph with a super-sink.
    longest = nx.dag_longest_path_length(graph, weight="weight")
    assert result.length == longest
    assert result.finish == START + dt.timedelta(days=longest - 1)


@pytest.mark.parametrize("seed", SEEDS)
def test_fs_critical_path_is_a_networkx_path_of_the_longest_length(seed):
    net, graph = random_fs_network(seed)
    result = critical_path(net)
    keys = [step.key for step in result.critical_path]
    # Reference: networkx.is_path — consecutive steps are relations of the graph.
    assert nx.is_path(graph, [*keys, SINK])
    duration = {k: int(d) for k, d in zip(net.keys, net.duration, strict=True)}
    # Reference: networkx.dag_longest_path_length on the graph with a super-sink.
    longest = nx.dag_longest_path_length(graph, weight="weight")
    assert sum(duration[k] for k in keys) == longest
    assert result.critical_path[0].driver.kind == "project_start"
    assert all(step.driver.kind == "relation" for step in result.critical_path[1:])


@pytest.mark.parametrize("seed", SEEDS[:10])
def test_fs_total_float_equals_networkx_slack_through_each_activity(seed):
    # Total float of activity i = longest path minus the longest path through
    # i: (longest path from the sources to i) + (longest path from i to the
    # sink). Both pieces come from networkx's topological order.
    net, graph = random_fs_network(seed)
    result = critical_path(net)
    # Reference: networkx.topological_sort and networkx.dag_longest_path_length.
    order = list(nx.topological_sort(graph))
    head = dict.fromkeys(order, 0)
    for node in order:
        for _, nxt, w in graph.out_edges(node, data="weight"):
            head[nxt] = max(head[nxt], head[node] + w)
    tail = dict.fromkeys(order, 0)
    for node in reversed(order):
        for _, nxt, w in graph.out_edges(node, data="weight"):
            tail[node] = max(tail[node], w + tail[nxt])
    longest = nx.dag_longest_path_length(graph, weight="weight")
    expected = [longest - head[k] - tail[k] for k in net.keys]
    assert result.total_float.tolist() == expected
    assert (result.early_start_pos - start_position(result)).tolist() == [
        head[k] for k in net.keys
    ]
