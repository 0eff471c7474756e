"""Axis forms keep exact decimals exact, warn about values given as logspace exponents."""

from __future__ import annotations

import json
import logging

import numpy as np

from sweepshell.config.plan_builder import _expand_form, snap_decimals
from sweepshell.store.writer import _same_axes


def test_linspace_and_range_give_exact_decimals():
    # the demo strip map's cubic_stiffness axis: np.linspace gives -2.78e-17 and -0.10000000000000002
    assert np.linspace(-0.2, 1.0, 13)[2] != 0.0
    values = _expand_form("axes.x", "linspace", [-0.2, 1.0, 13])
    assert [str(v) for v in values[:4]] == ["-0.2", "-0.1", "0.0", "0.1"]
    assert _expand_form("axes.x", "range", [0, 1, 0.1])[3] == 0.3  # 3 * 0.1 = 0.30000000000000004
    thirds = _expand_form("axes.x", "linspace", [0, 1, 4])
    assert thirds[1] == 1 / 3  # not a short decimal: left alone
    assert _expand_form("axes.x", "logspace", [-3, 0, 4]) == [0.001, 0.01, 0.1, 1.0]


def test_snapping_moves_values_by_a_few_ulps_at_most():
    raw = np.linspace(-2.5, 12.0, 300)
    snapped = snap_decimals(raw, 12.0)
    assert np.max(np.abs(np.asarray(snapped) - raw)) <= 16 * np.finfo(float).eps * 12.0


def test_logspace_exponents_that_look_like_values_warn(caplog):
    with caplog.at_level(logging.WARNING):
        _expand_form("axes.x", "logspace", [0.001, 1, 5])
    assert "logspace takes base-10 exponents" in caplog.text and "{logspace: [-3, 0, 5]}" in caplog.text
    caplog.clear()
    with caplog.at_level(logging.WARNING):
        _expand_form("axes.x", "logspace", [-3, 0, 5])
        _expand_form("axes.x", "logspace", [3.5, 4.8, 27])
    assert caplog.text == ""


def test_stores_written_before_snapping_still_resume():
    old = json.dumps({"x": list(np.linspace(-0.2, 1.0, 13)), "end": ["a", "b"]})
    new = json.dumps({"x": _expand_form("axes.x", "linspace", [-0.2, 1.0, 13]), "end": ["a", "b"]})
    assert old != new and _same_axes(old, new)
    assert not _same_axes(old, json.dumps({"x": [v + 1e-9 for v in json.loads(new)["x"]], "end": ["a", "b"]}))
    assert not _same_axes(old, json.dumps({"x": json.loads(new)["x"], "end": ["a", "c"]}))
