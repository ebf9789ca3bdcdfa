"""Compiled serial passes for the genetic search (:mod:`.improve`).

The genetic search decodes thousands of activity lists; in plain Python one
list with its forward-backward improvement costs several milliseconds on a
network of 120 activities. This module holds the same passes as
:class:`.improve.Decoder` — the serial scheme in list order, the backward and
forward passes of the improvement, the start order of a schedule — written
over flat integer arrays and compiled with Numba (``numba.njit``), for the
common case the decoder calls *flat*: every relation an offset between
positions and every crew counted on its activities' own calendar positions
(see :class:`.heuristic.Timeline`). Anything else keeps the Python passes.

Each function here does exactly what its Python twin does, step by step and
tie by tie, so both give the same schedule for the same list; the tests hold
them to that on random lists. Compiled code is cached on disk beside this
file (or in ``NUMBA_CACHE_DIR``), so a process compiles only when the source
changed; :func:`warm_up` compiles (or loads) everything ahead of the first
solve.

Arrays (all ``int64``; ``n`` activities, ``K`` crews):

* ``dur``, ``lb`` (least start position), ``hi`` (greatest start position
  whose end is within the limit), ``cal`` (calendar), ``pin`` (the fixed
  position of work done or under way, else ``-1``);
* relations in compressed rows: ``in_ptr``/``in_src``/``in_off`` (the
  predecessors of each activity and the offset each adds to its start) and
  ``out_ptr``/``out_dst``/``out_off`` (the same seen from the predecessor);
* demands in compressed rows: ``need_ptr``/``need_k``/``need_u``;
* ``base[k, t]``: free units of crew ``k`` at position ``t`` (unavailable
  periods taken out), ``row_len[k]`` the used length of the row;
* ``dtab[c, p]``: the day of position ``p`` on calendar ``c``; ``wtab[c, t]``
  the position of day ``t`` (both without the timeline's padding offset,
  which is passed as ``pad``).
"""

from __future__ import annotations

import numpy as np

try:  # the compiled passes are an optimisation: without Numba, Python runs
    from numba import njit
except ImportError:  # pragma: no cover - Numba is a declared dependency
    njit = None  # type: ignore[assignment]

INF = 1 << 60


def _jit(fn):
    if njit is None:  # pragma: no cover
        return fn
    return njit(cache=True, nogil=True)(fn)


# -- a binary heap of int64 keys ------------------------------------------


@_jit
def _push(heap, size, key):
    at = size
    heap[at] = key
    while at > 0:
        up = (at - 1) >> 1
        if heap[up] <= heap[at]:
            break
        heap[up], heap[at] = heap[at], heap[up]
        at = up
    return size + 1


@_jit
def _pop(heap, size):
    top = heap[0]
    size -= 1
    heap[0] = heap[size]
    at = 0
    while True:
        left = 2 * at + 1
        if left >= size:
            break
        small = left
        if left + 1 < size and heap[left + 1] < heap[left]:
            small = left + 1
        if heap[at] <= heap[small]:
            break
        heap[at], heap[small] = heap[small], heap[at]
        at = small
    return top, size


# -- crew rows ---------------------------------------------------------------


@_jit
def _row_min(row, a, b, length, default):
    """``min(row[a:b], default=default)`` over the used length of the row,
    with Python's reading of negative ``a``."""
    if a < 0:
        a = max(length + a, 0)
    b = min(b, length)
    m = default
    first = True
    for t in range(a, b):
        if first or row[t] < m:
            m = row[t]
            first = False
    return m


@_jit
def _fits_from(free, row_len, need_ptr, need_k, need_u, dur, i, p):
    d = dur[i]
    moved = True
    while moved:
        moved = False
        for x in range(need_ptr[i], need_ptr[i + 1]):
            k = need_k[x]
            u = need_u[x]
            e = p + d
            if e > row_len[k]:
                return INF
            if _row_min(free[k], p, e, row_len[k], u) < u:
                t = e - 1
                while free[k, t] >= u:
                    t -= 1
                p = t + 1
                moved = True
    return p


@_jit
def _fits_before(free, row_len, need_ptr, need_k, need_u, dur, i, p):
    d = dur[i]
    moved = True
    while moved:
        moved = False
        for x in range(need_ptr[i], need_ptr[i + 1]):
            k = need_k[x]
            u = need_u[x]
            if p < 0:
                return p
            if _row_min(free[k], p, p + d, row_len[k], u) < u:
                t = p
                while free[k, t] >= u:
                    t += 1
                p = t - d
                moved = True
    return p


@_jit
def _fits(free, row_len, need_ptr, need_k, need_u, dur, i, p):
    for x in range(need_ptr[i], need_ptr[i + 1]):
        k = need_k[x]
        u = need_u[x]
        if _row_min(free[k], p, p + dur[i], row_len[k], u) < u:
            return False
    return True


@_jit
def _take(free, row_len, need_ptr, need_k, need_u, dur, i, p):
    for x in range(need_ptr[i], need_ptr[i + 1]):
        k = need_k[x]
        u = need_u[x]
        a = p
        if a < 0:
            a = max(row_len[k] + a, 0)
        b = min(p + dur[i], row_len[k])
        for t in range(a, b):
            free[k, t] -= u


# -- passes ----------------------------------------------------------------


@_jit
def decode(
    order, dur, lb, hi, in_ptr, in_src, in_off, need_ptr, need_k, need_u, base, row_len
):
    """Serial scheme in list order; ``pos[0] == -INF`` marks no room."""
    n = dur.shape[0]
    free = base.copy()
    pos = np.zeros(n, dtype=np.int64)
    for i in order:
        p = lb[i]
        for x in range(in_ptr[i], in_ptr[i + 1]):
            q = pos[in_src[x]] + in_off[x]
            if q > p:
                p = q
        if need_ptr[i + 1] > need_ptr[i]:
            while True:
                if p > hi[i]:
                    pos[0] = -INF
                    return pos
                q = _fits_from(free, row_len, need_ptr, need_k, need_u, dur, i, p)
                if q == p:
                    break
                if q >= INF:
                    pos[0] = -INF
                    return pos
                p = q
            _take(free, row_len, need_ptr, need_k, need_u, dur, i, p)
        elif p > hi[i]:
            pos[0] = -INF
            return pos
        pos[i] = p
    return pos


@_jit
def finish_of(pos, dur, cal, dtab, pad):
    best = -INF
    for i in range(pos.shape[0]):
        f = dtab[cal[i], pos[i] + max(dur[i] - 1, 0)] - pad
        if f > best:
            best = f
    return best


@_jit
def backward(
    pos,
    finish,
    dur,
    cal,
    pin,
    in_ptr,
    in_src,
    out_ptr,
    out_dst,
    out_off,
    need_ptr,
    need_k,
    need_u,
    base,
    row_len,
    dtab,
    wtab,
    pad,
):
    n = dur.shape[0]
    span = n + 1
    free = base.copy()
    new = pos.copy()
    waiting = np.empty(n, dtype=np.int64)
    fin = np.empty(n, dtype=np.int64)
    heap = np.empty(n, dtype=np.int64)
    size = 0
    for i in range(n):
        waiting[i] = out_ptr[i + 1] - out_ptr[i]
        fin[i] = dtab[cal[i], pos[i] + max(dur[i] - 1, 0)] - pad
    for i in range(n):
        if waiting[i] == 0:
            size = _push(heap, size, -(fin[i] * span + i))
    while size > 0:
        key, size = _pop(heap, size)
        i = -key - (-key // span) * span
        lo = pos[i]
        if pin[i] >= 0:
            p = pin[i]
        else:
            p = wtab[cal[i], finish + 1 + pad] - max(dur[i], 1)
        for x in range(out_ptr[i], out_ptr[i + 1]):
            q = new[out_dst[x]] - out_off[x]
            if q < p:
                p = q
        if need_ptr[i + 1] > need_ptr[i]:
            if p > lo:
                while p > lo:
                    q = _fits_before(free, row_len, need_ptr, need_k, need_u, dur, i, p)
                    if q == p:
                        break
                    p = q
                if p < lo:
                    p = lo
            else:
                p = lo
            if p == lo and not _fits(
                free, row_len, need_ptr, need_k, need_u, dur, i, lo
            ):
                return pos.copy()
            _take(free, row_len, need_ptr, need_k, need_u, dur, i, p)
        elif p < lo:
            p = lo
        new[i] = p
        for x in range(in_ptr[i], in_ptr[i + 1]):
            j = in_src[x]
            waiting[j] -= 1
            if waiting[j] == 0:
                size = _push(heap, size, -(fin[j] * span + j))
    return new


@_jit
def forward(
    pos,
    dur,
    cal,
    lb,
    in_ptr,
    in_src,
    in_off,
    out_ptr,
    out_dst,
    need_ptr,
    need_k,
    need_u,
    base,
    row_len,
    dtab,
    pad,
):
    n = dur.shape[0]
    span = n + 1
    free = base.copy()
    new = pos.copy()
    waiting = np.empty(n, dtype=np.int64)
    start = np.empty(n, dtype=np.int64)
    heap = np.empty(n, dtype=np.int64)
    size = 0
    for i in range(n):
        waiting[i] = in_ptr[i + 1] - in_ptr[i]
        start[i] = dtab[cal[i], pos[i]] - pad
    for i in range(n):
        if waiting[i] == 0:
            size = _push(heap, size, start[i] * span + i)
    while size > 0:
        key, size = _pop(heap, size)
        i = key - (key // span) * span
        top = pos[i]
        p = lb[i]
        for x in range(in_ptr[i], in_ptr[i + 1]):
            q = new[in_src[x]] + in_off[x]
            if q > p:
                p = q
        if need_ptr[i + 1] > need_ptr[i]:
            while p < top:
                q = _fits_from(free, row_len, need_ptr, need_k, need_u, dur, i, p)
                if q == p:
                    break
                p = q
            if p >= top:
                p = top
                if not _fits(free, row_len, need_ptr, need_k, need_u, dur, i, top):
                    return pos.copy()
            _take(free, row_len, need_ptr, need_k, need_u, dur, i, p)
        elif p > top:
            p = top
        new[i] = p
        for x in range(out_ptr[i], out_ptr[i + 1]):
            j = out_dst[x]
            waiting[j] -= 1
            if waiting[j] == 0:
                size = _push(heap, size, start[j] * span + j)
    return new


@_jit
def improve(
    pos,
    rounds,
    dur,
    cal,
    lb,
    pin,
    in_ptr,
    in_src,
    in_off,
    out_ptr,
    out_dst,
    out_off,
    need_ptr,
    need_k,
    need_u,
    base,
    row_len,
    dtab,
    wtab,
    pad,
):
    """Forward-backward improvement while it shortens, at most ``rounds``
    times; the schedule and its finish day."""
    finish = finish_of(pos, dur, cal, dtab, pad)
    for _ in range(rounds):
        late = backward(
            pos,
            finish,
            dur,
            cal,
            pin,
            in_ptr,
            in_src,
            out_ptr,
            out_dst,
            out_off,
            need_ptr,
            need_k,
            need_u,
            base,
            row_len,
            dtab,
            wtab,
            pad,
        )
        early = forward(
            late,
            dur,
            cal,
            lb,
            in_ptr,
            in_src,
            in_off,
            out_ptr,
            out_dst,
            need_ptr,
            need_k,
            need_u,
            base,
            row_len,
            dtab,
            pad,
        )
        got = finish_of(early, dur, cal, dtab, pad)
        if got >= finish:
            if got == finish:
                return early, got
            return pos, finish
        pos = early
        finish = got
    return pos, finish


@_jit
def order_of(pos, dur, cal, in_ptr, out_ptr, out_dst, dtab, pad):
    """A precedence-feasible list in order of start day (ties: number)."""
    n = dur.shape[0]
    span = n + 1
    waiting = np.empty(n, dtype=np.int64)
    start = np.empty(n, dtype=np.int64)
    heap = np.empty(n, dtype=np.int64)
    out = np.empty(n, dtype=np.int64)
    size = 0
    got = 0
    for i in range(n):
        waiting[i] = in_ptr[i + 1] - in_ptr[i]
        start[i] = dtab[cal[i], pos[i]] - pad
    for i in range(n):
        if waiting[i] == 0:
            size = _push(heap, size, start[i] * span + i)
    while size > 0:
        key, size = _pop(heap, size)
        i = key - (key // span) * span
        out[got] = i
        got += 1
        for x in range(out_ptr[i], out_ptr[i + 1]):
            j = out_dst[x]
            waiting[j] -= 1
            if waiting[j] == 0:
                size = _push(heap, size, start[j] * span + j)
    return out


# -- one generation of the genetic search -----------------------------------


@_jit
def _crossover(mother, father, taken, child):
    """Two-point crossover into ``child`` (see :func:`.improve._crossover`)."""
    n = mother.shape[0]
    q1 = np.random.randint(0, n + 1)
    q2 = np.random.randint(0, n)
    if q2 >= q1:
        q2 += 1
    if q2 < q1:
        q1, q2 = q2, q1
    taken[:] = False
    got = 0
    for x in range(q1):
        child[got] = mother[x]
        taken[mother[x]] = True
        got += 1
    for x in range(n):
        if got >= q2:
            break
        i = father[x]
        if not taken[i]:
            child[got] = i
            taken[i] = True
            got += 1
    for x in range(n):
        i = mother[x]
        if not taken[i]:
            child[got] = i
            taken[i] = True
            got += 1


@_jit
def _mutate(order, rate, related):
    """Swap neighbours that no relation joins, each with probability ``rate``."""
    for at in range(order.shape[0] - 1):
        if np.random.random() < rate:
            a = order[at]
            b = order[at + 1]
            if not related[a, b]:
                order[at] = b
                order[at + 1] = a


@_jit
def breed(
    parents,
    rate,
    related,
    rounds,
    seed,
    hi,
    dur,
    cal,
    lb,
    pin,
    in_ptr,
    in_src,
    in_off,
    out_ptr,
    out_dst,
    out_off,
    need_ptr,
    need_k,
    need_u,
    base,
    row_len,
    dtab,
    wtab,
    pad,
):
    """One generation: the parents (rows of activity lists) paired at random,
    two children per pair by crossover and mutation, each decoded and
    improved. Returns the children's lists (in start order), positions,
    finish days and whether each fitted the limit. ``seed`` seeds Numba's
    own generator, so a generation depends on its arguments alone."""
    np.random.seed(seed)
    m, n = parents.shape
    pairs = m // 2
    perm = np.random.permutation(m)
    orders = np.empty((2 * pairs, n), dtype=np.int64)
    places = np.empty((2 * pairs, n), dtype=np.int64)
    finish = np.empty(2 * pairs, dtype=np.int64)
    ok = np.zeros(2 * pairs, dtype=np.bool_)
    taken = np.zeros(n, dtype=np.bool_)
    child = np.empty(n, dtype=np.int64)
    for a in range(pairs):
        for side in range(2):
            one = parents[perm[2 * a + side]]
            two = parents[perm[2 * a + 1 - side]]
            _crossover(one, two, taken, child)
            _mutate(child, rate, related)
            c = 2 * a + side
            pos = decode(
                child,
                dur,
                lb,
                hi,
                in_ptr,
                in_src,
                in_off,
                need_ptr,
                need_k,
                need_u,
                base,
                row_len,
            )
            if pos[0] == -INF:
                continue
            pos, got = improve(
                pos,
                rounds,
                dur,
                cal,
                lb,
                pin,
                in_ptr,
                in_src,
                in_off,
                out_ptr,
                out_dst,
                out_off,
                need_ptr,
                need_k,
                need_u,
                base,
                row_len,
                dtab,
                wtab,
                pad,
            )
            places[c] = pos
            orders[c] = order_of(pos, dur, cal, in_ptr, out_ptr, out_dst, dtab, pad)
            finish[c] = got
            ok[c] = True
    return orders, places, finish, ok


# -- steps of the local search ------------------------------------------------


@_jit
def _shift(order, where, in_ptr, in_src, out_ptr, out_dst):
    """Move one activity, drawn at random, to a random other place between
    its last predecessor and its first successor (see
    :func:`.improve._shift`); ``where[i]`` is ``i``'s index in ``order`` and
    is kept so."""
    n = order.shape[0]
    at = np.random.randint(0, n)
    i = order[at]
    lo = 0
    for x in range(in_ptr[i], in_ptr[i + 1]):
        lo = max(lo, where[in_src[x]] + 1)
    hi = n
    for x in range(out_ptr[i], out_ptr[i + 1]):
        hi = min(hi, where[out_dst[x]])
    if hi - lo <= 1:
        return
    to = np.random.randint(lo, hi - 1)
    if to >= at:
        to += 1
    if to > at:
        for x in range(at, to):
            order[x] = order[x + 1]
            where[order[x]] = x
    else:
        for x in range(at, to, -1):
            order[x] = order[x - 1]
            where[order[x]] = x
    order[to] = i
    where[i] = to


@_jit
def shift_steps(
    order,
    pos,
    finish,
    steps,
    moves,
    seed,
    rounds,
    hi,
    dur,
    cal,
    lb,
    pin,
    in_ptr,
    in_src,
    in_off,
    out_ptr,
    out_dst,
    out_off,
    need_ptr,
    need_k,
    need_u,
    base,
    row_len,
    dtab,
    wtab,
    pad,
):
    """Up to ``steps`` steps of the local search of
    :func:`.improve.shift_search` from the schedule ``pos`` (finish day
    ``finish``, list ``order`` in its start order): each moves one to
    ``moves`` activities of the list (:func:`_shift`), decodes and improves
    it, and takes the result when it finishes no later. Returns the steps
    taken, the current list, positions and finish; it returns early, after
    the step, when a schedule finishes sooner than ``finish``. ``seed``
    seeds Numba's own generator."""
    np.random.seed(seed)
    n = order.shape[0]
    child = np.empty(n, dtype=np.int64)
    where = np.empty(n, dtype=np.int64)
    start = finish
    for step in range(steps):
        child[:] = order
        for x in range(n):
            where[child[x]] = x
        for _ in range(np.random.randint(1, moves + 1)):
            _shift(child, where, in_ptr, in_src, out_ptr, out_dst)
        got = decode(
            child,
            dur,
            lb,
            hi,
            in_ptr,
            in_src,
            in_off,
            need_ptr,
            need_k,
            need_u,
            base,
            row_len,
        )
        if got[0] == -INF:
            continue
        got, got_finish = improve(
            got,
            rounds,
            dur,
            cal,
            lb,
            pin,
            in_ptr,
            in_src,
            in_off,
            out_ptr,
            out_dst,
            out_off,
            need_ptr,
            need_k,
            need_u,
            base,
            row_len,
            dtab,
            wtab,
            pad,
        )
        if got_finish <= finish:
            pos = got
            finish = got_finish
            order = order_of(pos, dur, cal, in_ptr, out_ptr, out_dst, dtab, pad)
            if finish < start:
                return step + 1, order, pos, finish
    return steps, order, pos, finish


_warm = False


def is_warm() -> bool:
    """True once :func:`warm_up` has run in this process (or when there is
    nothing to compile: Numba absent)."""
    return _warm or njit is None


def warm_up() -> None:
    """Compile every pass (or load it from the cache) on a two-activity
    network, with the argument types the decoder passes, so that the first
    real solve does not spend its time limit compiling. Once per process;
    about 15 s the first time after an install or a change here, well under
    a second from the cache."""
    global _warm
    if is_warm():
        return
    i64 = np.int64
    dur = np.array([2, 1], dtype=i64)
    zero = np.zeros(2, dtype=i64)
    hi = np.array([8, 9], dtype=i64)
    pin = np.full(2, -1, dtype=i64)
    in_ptr = np.array([0, 0, 1], dtype=i64)
    out_ptr = np.array([0, 1, 1], dtype=i64)
    one = np.array([0], dtype=i64)
    off = np.array([2], dtype=i64)
    need_ptr = np.array([0, 1, 2], dtype=i64)
    units = np.ones(2, dtype=i64)
    base = np.ones((1, 12), dtype=i64)
    row_len = np.array([12], dtype=i64)
    tab = np.arange(12, dtype=i64).reshape(1, 12)
    related = np.ones((2, 2), dtype=np.bool_)
    order = np.array([0, 1], dtype=i64)
    links = (in_ptr, one, off, out_ptr, one, off, need_ptr, zero, units, base, row_len)
    pos = decode(
        order, dur, zero, hi, in_ptr, one, off, need_ptr, zero, units, base, row_len
    )
    pos, _ = improve(pos, 1 << 30, dur, zero, zero, pin, *links, tab, tab, 0)
    order_of(pos, dur, zero, in_ptr, out_ptr, one, tab, 0)
    breed(
        np.stack((order, order)),
        0.05,
        related,
        1 << 30,
        1,
        hi,
        dur,
        zero,
        zero,
        pin,
        *links,
        tab,
        tab,
        0,
    )
    shift_steps(
        order, pos, 3, 2, 6, 1, 1 << 30, hi, dur, zero, zero, pin, *links, tab, tab, 0
    )
    _warm = True


__all__ = [
    "INF",
    "backward",
    "breed",
    "decode",
    "finish_of",
    "forward",
    "improve",
    "order_of",
    "shift_steps",
    "warm_up",
]
