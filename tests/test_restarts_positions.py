"""Restarts list the first EDGE_CAP jumps and joins of its cycles without building every cycle's positions."""

from __future__ import annotations

import time

import numpy as np
from hypothesis import given, reject, settings
from hypothesis import strategies as st

import schedwidget as sw
from schedwidget.schedule import EDGE_CAP
from schedwidget.stages import _cap

from .strategies import leaves


def _every_cycle(r, inner: np.ndarray, starts: np.ndarray, lens: np.ndarray) -> np.ndarray:
    """The positions of every listed cycle, the way restarts computed them before (the reference)."""
    L = float(r.target.length)
    return (starts[:, None] + (inner[None, :] * lens[:, None]) / L).ravel()


def _reference_edges(r, hi: float) -> np.ndarray:
    starts, lens = r._starts(hi)
    inner = r.target._edges(float(r.target.length))
    pos = _every_cycle(r, inner, starts, lens) if inner.size else np.empty(0)
    found = np.concatenate([starts[1:], pos])
    return _cap(found[(found > 0) & (found <= hi)])


def _reference_joins(r) -> np.ndarray:
    inner = r.target._joins()
    if not inner.size:
        return inner
    starts, lens = r._starts(float(2 ** 53 if r.length is None else r.length))
    return _cap(_every_cycle(r, inner, starts, lens))


dense = st.builds(lambda n, k: sw.drops(0.1, at=tuple(range(1, n)), factor=0.999, steps=n) >> sw.flat(0.01, steps=k),
                  st.integers(2, 6000), st.integers(1, 5))


class TestFirstCycles:
    @settings(max_examples=120, deadline=None)
    @given(st.one_of(leaves(), dense, st.builds(lambda a, b: a >> b, leaves(), leaves())),
           st.one_of(st.none(), st.integers(1, 6000)), st.sampled_from([1.0, 0.5, 0.7, 1.5, 2.0]),
           st.floats(0.3, 1.0))
    def test_same_positions_as_every_cycle(self, target, cycles, growth, decay):
        """Edges and joins equal the reference that took every cycle (restart positions move with each cycle)."""
        try:
            r = sw.restarts(target, cycles=cycles, growth=growth, peak_decay=decay)
        except sw.ScheduleError:  # growing cycles past 2**53 ticks: not a design
            reject()
        hi = float(r.length if r.length is not None else 10 ** 9)
        assert np.array_equal(r._edges(hi), _reference_edges(r, hi))
        assert np.array_equal(r._joins(), _reference_joins(r))

    def test_dense_target_with_many_cycles_is_quick(self):
        """A target with thousands of jumps, restarted thousands of times: its first EDGE_CAP jumps, at once.

        Taking every cycle built (EDGE_CAP + 1) x 5,999 positions (200 MB) and sorted them.
        """
        r = sw.restarts(sw.drops(0.1, at=tuple(range(1, 6000)), factor=0.999, steps=6000), cycles=5000)
        t0 = time.process_time()
        edges = r._edges(float(r.length))
        assert time.process_time() - t0 < 1.0  # generous: it takes milliseconds
        assert edges.size == EDGE_CAP and edges[0] == 1.0 and np.all(np.diff(edges) > 0)
