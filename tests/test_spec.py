"""Schedules as data: versioned JSON, the shipped schema, atomic save, safe load."""

from __future__ import annotations

import json
import os

import jsonschema
import pytest

import schedwidget as sw
from schedwidget import ScheduleError, cosine, drops, flat, from_spec, load, load_design, restarts, save, warmup
from schedwidget.spec import KINDS, json_schema, shipped_schema


def demo_design():
    """The demo scenario's warmup + cosine (invented): 90 epochs of 1,150 steps, 5 of them warmup."""
    return warmup(cosine(0.1, steps=85 * 1150), steps=5 * 1150)


class TestSpec:
    """to_spec / from_spec."""

    def test_round_trip_and_plain_json(self):
        s = (restarts(cosine(0.1, steps=100), cycles=3, growth=2.0) >> drops(0.01, at=(5,))).clip(low=1e-4)
        spec = s.to_spec()
        assert spec["version"] == 1 and spec["schedule"]["kind"] == "clip"
        assert from_spec(json.loads(json.dumps(spec))) == s

    def test_every_kind_is_registered_and_in_schema(self):
        schema = json_schema()
        assert set(KINDS) <= set(schema["$defs"])
        jsonschema.Draft202012Validator.check_schema(schema)

    def test_shipped_schema_is_generated_one(self):
        # the file editors validate against is the one generated from the parameter declarations
        assert shipped_schema() == json_schema()

    def test_unit_travels(self, tmp_path):
        path = save(demo_design(), tmp_path / "design.json", unit="step", steps_per_epoch=1150)
        d = load_design(path)
        assert d.schedule == demo_design() and d.unit == "step" and d.steps_per_epoch == 1150

    def test_floats_bit_exact(self, tmp_path):
        s = cosine(0.1 / 3, floor=1e-7 / 7, steps=10)
        assert load(save(s, tmp_path / "x.json")) == s


class TestSaveLoad:
    """Atomic save, and loading that never runs code."""

    def test_atomic_replace_keeps_old_file_on_failure(self, tmp_path, monkeypatch):
        path = tmp_path / "d.json"
        save(flat(0.1, steps=5), path)
        before = path.read_text()

        def boom(*a, **k):
            raise OSError("disk full")
        monkeypatch.setattr(os, "replace", boom)
        with pytest.raises(OSError):
            save(flat(0.2, steps=5), path)
        assert path.read_text() == before
        assert [p.name for p in tmp_path.iterdir()] == ["d.json"]  # no temp file left behind

    def test_load_errors(self, tmp_path):
        with pytest.raises(ScheduleError, match=r"load: path must name an existing file"):
            load(tmp_path / "missing.json")
        bad = tmp_path / "bad.json"
        bad.write_text("{not json")
        with pytest.raises(ScheduleError, match=r"is not JSON \(line 1, column 2"):
            load(bad)

    def test_code_in_strings_is_data(self, tmp_path):
        path = tmp_path / "evil.json"
        path.write_text(json.dumps({"version": 1, "schedule": {"kind": "__import__('os').system('x')"}}))
        with pytest.raises(ScheduleError, match=r"is not one of"):
            load(path)

    def test_save_needs_folder(self, tmp_path):
        with pytest.raises(ScheduleError, match=r"save: path must be in an existing folder"):
            save(flat(0.1), tmp_path / "nope" / "x.json")
        with pytest.raises(ScheduleError, match=r"save: s must be a Schedule"):
            save({"kind": "flat"}, tmp_path / "x.json")


def test_public_names():
    for name in sw.__all__:
        assert hasattr(sw, name)


def test_node_by_node_check_agrees_with_the_full_schema():
    """The loader checks each node against its own kind; it must flag exactly what the shipped schema flags."""
    import random

    from schedwidget import exp_decay, stages

    full = jsonschema.Draft202012Validator(shipped_schema())
    base = stages(*[cosine(0.1, steps=10 + i) if i % 2 else warmup(exp_decay(0.1, 0.9, steps=20), 5)
                    for i in range(8)]).to_spec()
    rng = random.Random(7)
    junk = [-1, "x", None, 1.5, [], {"kind": "nope"}, 10**20, True, ["a"], {"kind": "flat"}, {}]
    for _ in range(400):
        d = json.loads(json.dumps(base))
        node = d["schedule"]
        for _ in range(rng.randint(0, 3)):
            node = rng.choice(node["parts"]) if "parts" in node else node.get("target", node)
        node[rng.choice(list(node))] = rng.choice(junk)
        invalid = any(True for _ in full.iter_errors(d))
        try:
            from_spec(d)
            flagged = False
        except ScheduleError as exc:
            flagged = "fix these fields" in str(exc)
        assert flagged == invalid, d
