"""Spec loading and saving under hostile input: bounded work, every failure a ScheduleError, files kept intact.

Issue 10 lists what escaped before: RecursionError from deeply nested JSON, ValueError/OverflowError from huge
integers, AttributeError/TypeError from ``to_spec(None)`` and odd path types, a load that blocks on a FIFO, and
``save()`` leaving every replaced file at mode 0600 and replacing a symlink by a regular file.
"""

from __future__ import annotations

import json
import os
import stat
import threading
import time

import jsonschema
import numpy as np
import pytest

from schedwidget import ScheduleError, cosine, flat, from_spec, load, load_design, save, stages, to_spec, warmup
from schedwidget import spec as spec_module
from schedwidget.spec import MAX_DEPTH, MAX_SPEC_BYTES, MAX_VALUES, shipped_schema


def _finishes(fn, seconds: float = 10.0):
    """Run ``fn`` in a thread; fail if it has not returned after ``seconds`` (a hang), else return its outcome."""
    box: dict = {}

    def go():
        try:
            box["value"] = fn()
        except BaseException as exc:  # noqa: BLE001 - the test inspects it
            box["error"] = exc
    t = threading.Thread(target=go, daemon=True)
    t.start()
    t.join(seconds)
    assert not t.is_alive(), f"still running after {seconds} s"
    return box


def _spec(node) -> dict:
    return {"version": 1, "schedule": node}


class TestDeepAndLarge:
    """Nesting, size and integer limits answer with a ScheduleError naming the limit."""

    def test_json_too_deep_for_the_parser(self, tmp_path):
        """100,000 nested arrays overflow json's own recursion (RecursionError before); now a ScheduleError."""
        p = tmp_path / "deep.json"
        p.write_text('{"version": 1, "schedule": ' + "[" * 100_000 + "]" * 100_000 + "}")
        with pytest.raises(ScheduleError, match=r"load: .* nests JSON arrays or objects too deeply to read; a spec "
                                                r"nests at most 99 levels \(48 schedules\)"):
            load(p)

    def test_json_deep_but_parsable(self, tmp_path):
        """500 levels parse; the iterative limit refuses them and names where."""
        node: dict = {"kind": "flat", "lr": 0.1, "steps": 3}
        for _ in range(500):
            node = {"kind": "scale", "target": node, "factor": 1.0}
        p = tmp_path / "deep.json"
        p.write_text(json.dumps(_spec(node)))
        with pytest.raises(ScheduleError, match=r"spec: nesting must be at most 48 schedules deep, got more at "
                                                r"schedule(\.target)+ \.\.\. target(\.target)+ \(at most 99 levels"):
            load(p)

    def test_depth_limit_is_the_same_for_writing_and_reading(self, tmp_path):
        """A design exactly MAX_DEPTH deep saves and loads; one more is refused by to_spec and by the loader."""
        from schedwidget import knots

        s = knots([(0, 0.1), (4, 0.2)])
        for _ in range(MAX_DEPTH - 1):
            s = s * 0.5
        assert load(save(s, tmp_path / "d48.json")) == s
        with pytest.raises(ScheduleError, match=r"^to_spec: s must be at most 48 nested schedules \(the limit of "
                                                r"spec files\), got 'a design more than 48 schedules deep'"):
            to_spec(s * 0.5)
        deeper = _spec({"kind": "scale", "factor": 0.5, "target": s.to_spec()["schedule"]})
        with pytest.raises(ScheduleError, match=r"spec: nesting must be at most 48 schedules deep"):
            from_spec(deeper)

    def test_deepest_json_form_within_the_limit_loads(self):
        """Stages inside stages take two JSON levels per schedule, a knots table two more: 48 deep still loads."""
        node = {"kind": "knots", "points": [[0, 0.1], [4, 0.2]]}
        for _ in range(MAX_DEPTH - 1):
            node = {"kind": "stages", "parts": [node, {"kind": "flat", "lr": 0.1, "steps": 1}]}
        assert from_spec(_spec(node)).length == 4 + MAX_DEPTH - 1

    def test_cyclic_dict(self):
        """A dict that contains itself (only possible from Python) ends at the depth limit, not in a hang."""
        node = {"kind": "scale", "factor": 1.0}
        node["target"] = node
        box = _finishes(lambda: from_spec(_spec(node)))
        assert isinstance(box.get("error"), ScheduleError), box
        assert "nesting must be at most 48 schedules deep" in str(box["error"])

    def test_shared_sub_documents_count_as_the_tree_they_unfold_to(self):
        """16 references to 16 references ... (16**9 leaves from a few KB) stop at MAX_VALUES."""
        part: object = 0.1
        for _ in range(9):
            part = [part] * 16
        box = _finishes(lambda: from_spec(_spec({"kind": "flat", "lr": part})), 60)
        assert isinstance(box.get("error"), ScheduleError), box
        assert f"a spec must hold at most {MAX_VALUES:,} JSON values" in str(box["error"])

    def test_node_limit_is_the_same_for_writing_and_reading(self):
        """MAX_NODES schedules: to_spec refuses one more, and so does the loader."""
        from schedwidget.spec import MAX_NODES

        part = {"kind": "flat", "lr": 0.1, "steps": 1}
        d = _spec({"kind": "stages", "parts": [part] * MAX_NODES})
        with pytest.raises(ScheduleError, match=r"^spec: a spec must hold at most 100,000 schedules, got more"):
            from_spec(d)
        shared = flat(0.1, steps=1)
        for _ in range(20):  # 2**20 leaves from 21 objects: counted as the tree it writes
            shared = shared + shared
        with pytest.raises(ScheduleError, match=r"^to_spec: s must be at most 100,000 schedules \(the limit of spec "
                                                r"files\), got 'a design of more than 100,000 schedules'"):
            to_spec(shared)

    @pytest.mark.parametrize("digits", [400, 5000, 100_000])
    def test_huge_integer_in_a_file(self, tmp_path, digits):
        """5,000 digits exceeded Python's int conversion limit (ValueError); 400 overflowed a float."""
        p = tmp_path / "big.json"
        p.write_text('{"version": 1, "schedule": {"kind": "cosine", "peak": 0.1, "steps": 1' + "0" * (digits - 1)
                     + "}}")
        with pytest.raises(ScheduleError, match=rf"spec: schedule.steps: an integer must be smaller than 2\*\*1024 "
                                                rf"\(about 1.8e308, a float's range\) in magnitude, got one of "
                                                rf"(about )?{digits:,} digits"):
            load(p)

    def test_huge_integer_in_a_dict(self):
        """From Python the same limit applies, with the JSON path of the value."""
        d = _spec({"kind": "stages", "parts": [{"kind": "flat", "lr": 0.1, "steps": 5},
                                               {"kind": "flat", "lr": 10 ** 400}]})
        with pytest.raises(ScheduleError, match=r"spec: schedule.parts\[1\].lr: an integer must be smaller than "
                                                r"2\*\*1024 .*about 401 digits"):
            from_spec(d)

    def test_integer_within_float_range_is_judged_by_the_schema(self):
        """An integer that fits a float is not refused by the size limit, only by the parameter's range."""
        with pytest.raises(ScheduleError, match=r"schedule.steps: 1000000000000000000000 is greater than the maximum"):
            from_spec(_spec({"kind": "cosine", "peak": 0.1, "steps": 10 ** 21}))

    def test_file_size_cap(self, tmp_path):
        """A spec file over MAX_SPEC_BYTES is refused before it is read (a sparse file: no disk used)."""
        p = tmp_path / "huge.json"
        with open(p, "wb") as fh:
            fh.truncate(MAX_SPEC_BYTES + 1)
        with pytest.raises(ScheduleError, match=r"load: path must name an existing file, got .* \(it has "
                                                r"16,777,217 bytes; at most 16,777,216 bytes \(16 MiB\) are read\)"):
            load(p)

    def test_non_finite_numbers_in_json_text(self, tmp_path):
        """Python's json reads NaN and 1e400 (inf); the parameter check refuses them with the JSON path."""
        p = tmp_path / "nan.json"
        p.write_text('{"version": 1, "schedule": {"kind": "flat", "lr": NaN}}')
        with pytest.raises(ScheduleError, match=r"spec: schedule: flat: lr must be a finite rate >= 0, got nan"):
            load(p)
        p.write_text('{"version": 1, "schedule": {"kind": "cosine", "peak": 1e400, "steps": 10}}')
        with pytest.raises(ScheduleError, match=r"spec: schedule(\.peak: inf is greater than the maximum|: cosine: "
                                                r"peak must be a finite rate)"):
            load(p)

    def test_spec_whose_rates_would_overflow(self):
        """A valid-looking spec of two rates of 1e308 summed: refused at construction, with the JSON path."""
        d = _spec({"kind": "sum", "left": {"kind": "flat", "lr": 1e308}, "right": {"kind": "flat", "lr": 1e308}})
        with pytest.raises(ScheduleError, match=r"^spec: schedule(\.[a-z]+)*: "):
            from_spec(d)


class TestArgumentTypes:
    """to_spec(None) and paths of other types were AttributeError/TypeError; now ScheduleError."""

    @pytest.mark.parametrize("value,shown", [(None, "None"), ({"kind": "flat"}, "'a dict'"), (0.1, "'a float'")])
    def test_to_spec_needs_a_schedule(self, value, shown):
        with pytest.raises(ScheduleError, match=rf"^to_spec: s must be a Schedule \(built with flat, cosine, "
                                                rf"stages, \.\.\.\), got {shown}$"):
            to_spec(value)

    @pytest.mark.parametrize("path,shown", [(3, "3"), (b"x.json", r"b'x.json'"), (None, "'None'"), ("", "''"),
                                            (["x.json"], "'a list'")])
    def test_paths_are_str_or_pathlike(self, tmp_path, path, shown):
        """A file descriptor, bytes, None, an empty string or a list is refused by load, load_design and save."""
        pattern = (r"(load|save): path must be a file path: a non-empty str or os.PathLike such as pathlib.Path, "
                   rf"got {shown} \(bytes paths and file descriptors are not accepted")
        for call in (lambda: load(path), lambda: load_design(path), lambda: save(flat(0.1), path)):
            with pytest.raises(ScheduleError, match=pattern):
                call()


class TestValidationRoutes:
    """Plain JSON is checked by predicates compiled from the shipped schema; they must decide exactly as it does."""

    def test_predicates_agree_with_the_full_schema(self):
        """2,000 seeded mutations of a spec with every kind: accepted by the predicates iff valid for jsonschema."""
        import random

        from tests.bench.design import twenty_stages

        full = jsonschema.Draft202012Validator(shipped_schema())
        accepts = spec_module._accepts()
        base = {"version": 1, "unit": "step", "steps_per_epoch": 10, "note": "x",
                "schedule": warmup(twenty_stages(10), 5).clip(low=1e-6, high=1.0).to_spec()["schedule"]}
        junk = [-1, 0, 1, 2, 1.0, 100.0, 0.5, -0.0, 1e300, float("nan"), float("inf"), -float("inf"), True, False,
                None, "x", "linear", "hold", "flat", [], [1], [[0, 0.1]], [[0, 0.1], [5, 0.2]], [[0, 0.1, 3], [5, 1]],
                [[0.0, 0.1], [5, 0.2]], [[True, 0.1], [5, 0.2]], [3, 4], [4, 3], {}, {"kind": "nope"},
                {"kind": "flat"}, {"kind": "flat", "lr": 0.1}, {"kind": "flat", "lr": 0.1, "steps": 5},
                10 ** 20, 2 ** 53, 2 ** 53 + 1, 1.5e16]
        rng = random.Random(20261202)
        agree = disagree = 0
        for _ in range(2000):
            d = json.loads(json.dumps(base))
            for _ in range(rng.randint(1, 3)):
                holder, key = _pick(rng, d)
                if rng.random() < 0.15 and isinstance(holder, dict):
                    holder.pop(key, None) if rng.random() < 0.5 else holder.__setitem__(rng.choice(
                        ["extra", "gamma", "kind", "steps"]), rng.choice(junk))
                else:
                    holder[key] = json.loads(json.dumps(rng.choice(junk)))  # fresh copy (nan/inf survive)
            ok = accepts(d)
            valid = full.is_valid(d)
            assert ok == valid, d
            agree += ok
            disagree += not ok
        assert agree > 100 and disagree > 100  # both outcomes were exercised

    def test_non_plain_values_take_the_validator_route(self):
        """numpy numbers are not JSON values: jsonschema judges them, and the result is the same design."""
        plain = _spec({"kind": "cosine", "peak": 0.1, "steps": 10})
        odd = _spec({"kind": "cosine", "peak": np.float64(0.1), "steps": 10})
        assert from_spec(odd) == from_spec(plain) == cosine(0.1, steps=10)

    def test_integral_floats_are_integers_on_both_routes(self):
        """Draft 2020-12 counts 10.0 as an integer; both routes accept it and the constructor decides."""
        d = _spec({"kind": "cosine", "peak": 0.1, "steps": 10.0})
        assert spec_module._accepts()(d)
        assert jsonschema.Draft202012Validator(shipped_schema()).is_valid(d)
        assert from_spec(d) == cosine(0.1, steps=10)


    def test_messages_for_long_tables_match_the_full_validation(self):
        """Long lists are shortened before jsonschema reads them; the messages (paths, texts) stay the same."""
        import random

        rng = random.Random(90128)
        bad_ticks = ["x", -1, 0, 1.5, None, 2 ** 60, True]
        bad_pairs = [[1], [1, 2, 3], ["a", 0.1], [1, -0.5], 7, [1.5, 0.1]]
        for _ in range(150):
            at = list(range(1, rng.randint(17, 300)))
            points = [[i * 3, 0.1] for i in range(rng.randint(17, 200))]
            for _ in range(rng.randint(0, 3)):
                at[rng.randrange(len(at))] = rng.choice(bad_ticks)
                points[rng.randrange(len(points))] = json.loads(json.dumps(rng.choice(bad_pairs)))
            node = {"kind": "stages", "parts": [{"kind": "drops", "peak": rng.choice([0.1, -1]), "at": at,
                                                 "steps": 10 ** 6},
                                                {"kind": "knots", "points": points, "interp": "linear"}]}
            d = _spec(node)
            full = sorted((tuple(p), m) for p, m, _ in spec_module._problems(d, plain=False))
            short = sorted((tuple(p), m) for p, m, _ in spec_module._problems(d, plain=True))
            assert short == full, (short, full)

    def test_a_bad_item_in_a_long_table_is_found_fast(self):
        """100,000 ticks and one bad one: the message names it without jsonschema reading every tick."""
        at = list(range(1, 100_001))
        at[76_543] = "x"
        box = _finishes(lambda: from_spec(_spec({"kind": "drops", "peak": 0.1, "at": at, "steps": 200_000})), 30)
        assert "schedule.at[76543]: 'x' is not of type 'integer'" in str(box.get("error")), box

    @pytest.mark.parametrize("value,name", [(complex(1, 0), "complex"), (np.int64(5), "int64"), ((1, 2), "tuple"),
                                            (np.bool_(True), "bool_?"), ({1, 2}, "set")])
    def test_values_that_are_not_json(self, value, name):
        """complex and Decimal made jsonschema raise TypeError / InvalidOperation; every non-JSON value is refused
        with its path (numpy float64, a float subclass, is still read)."""
        from decimal import Decimal

        d = _spec({"kind": "poly", "peak": 0.1, "steps": value})
        with pytest.raises(ScheduleError, match=rf"^spec: schedule.steps must be a JSON value \(an object, array, "
                                                rf"string, number, true, false or null\), got a {name}$"):
            from_spec(d)
        with pytest.raises(ScheduleError, match=r"schedule.factor must be a JSON value .* got a Decimal"):
            from_spec(_spec({"kind": "exp_decay", "peak": 0.1, "factor": Decimal("NaN")}))

    def test_keys_must_be_strings(self):
        with pytest.raises(ScheduleError, match=r"^spec: schedule: object keys must be strings, got 1$"):
            from_spec(_spec({"kind": "flat", "lr": 0.1, 1: 2}))


def _pick(rng, d):
    """A random (container, key) inside ``d``'s schedule tree."""
    holder, key = d, "schedule"
    if key not in d:
        return holder, key
    for _ in range(rng.randint(0, 6)):
        v = holder[key]
        if isinstance(v, dict) and v:
            holder, key = v, rng.choice(list(v))
        elif isinstance(v, list) and v:
            holder, key = v, rng.randrange(len(v))
        else:
            break
    return holder, key


class TestFilesThatAreNotFiles:
    """load refuses pipes and devices without opening them, and never blocks."""

    def test_fifo(self, tmp_path):
        """A FIFO with no writer blocked open() forever before."""
        p = tmp_path / "spec.fifo"
        os.mkfifo(p)
        box = _finishes(lambda: load(p), 10)
        assert isinstance(box.get("error"), ScheduleError), box
        assert "it is a pipe (FIFO); only regular files are read" in str(box["error"])

    def test_dev_zero(self):
        """/dev/zero never ends (MemoryError before)."""
        if not os.path.exists("/dev/zero"):
            pytest.skip("no /dev/zero here")
        with pytest.raises(ScheduleError, match=r"got '/dev/zero' \(it is a character device; only regular files"):
            load("/dev/zero")

    def test_undecodable(self, tmp_path):
        p = tmp_path / "latin.json"
        p.write_bytes(b'{"version": 1, "note": "caf\xe9"}')
        with pytest.raises(ScheduleError, match=r"cannot be read as UTF-8 text \(byte 27: invalid continuation"):
            load(p)


class TestSave:
    """save() replaces atomically, keeps the mode of the file it replaces and writes through symlinks."""

    @pytest.mark.parametrize("mode", [0o644, 0o640, 0o755, 0o600])
    def test_replaced_file_keeps_its_mode(self, tmp_path, mode):
        """Before, every replaced file ended at 0600 (tempfile's mode)."""
        p = tmp_path / "d.json"
        p.write_text("{}")
        os.chmod(p, mode)
        save(flat(0.1, steps=5), p)
        assert stat.S_IMODE(os.stat(p).st_mode) == mode
        assert load(p) == flat(0.1, steps=5)

    @pytest.mark.parametrize("umask", [0o022, 0o077, 0o002])
    def test_new_file_respects_umask(self, tmp_path, umask):
        old = os.umask(umask)
        try:
            path = save(flat(0.1), tmp_path / "new.json")
        finally:
            os.umask(old)
        assert stat.S_IMODE(os.stat(path).st_mode) == 0o666 & ~umask

    def test_symlink_is_written_through(self, tmp_path):
        """The link stays a link; the file it names gets the new design (before: the link became a file)."""
        real = tmp_path / "real"
        real.mkdir()
        target = real / "design.json"
        save(flat(0.1, steps=5), target)
        os.chmod(target, 0o640)
        link = tmp_path / "current.json"
        link.symlink_to(target)
        save(cosine(0.1, steps=7), link)
        assert link.is_symlink() and os.readlink(link) == str(target)
        assert load(target) == cosine(0.1, steps=7) == load(link)
        assert stat.S_IMODE(os.stat(target).st_mode) == 0o640
        assert sorted(p.name for p in real.iterdir()) == ["design.json"]  # no temporary file left behind

    def test_dangling_symlink_creates_its_target(self, tmp_path):
        link = tmp_path / "next.json"
        link.symlink_to(tmp_path / "made.json")
        save(flat(0.2), link)
        assert link.is_symlink() and load(tmp_path / "made.json") == flat(0.2)

    def test_link_into_a_missing_folder(self, tmp_path):
        link = tmp_path / "lost.json"
        link.symlink_to(tmp_path / "gone" / "x.json")
        with pytest.raises(ScheduleError, match=r"save: path must be in an existing folder, got .*lost.json' "
                                                r"\(the link leads to .*gone/x.json'\)"):
            save(flat(0.2), link)

    def test_refuses_what_is_not_a_regular_file(self, tmp_path):
        """A folder or a FIFO is not replaced by a file."""
        (tmp_path / "dir.json").mkdir()
        os.mkfifo(tmp_path / "pipe.json")
        with pytest.raises(ScheduleError, match=r"save: path must be a regular file or a new name, got .* "
                                                r"\(it is a folder\)"):
            save(flat(0.1), tmp_path / "dir.json")
        with pytest.raises(ScheduleError, match=r"\(it is a pipe \(FIFO\)\)"):
            save(flat(0.1), tmp_path / "pipe.json")
        assert stat.S_ISFIFO(os.stat(tmp_path / "pipe.json").st_mode)

    def test_failure_leaves_the_old_file_and_no_temporary(self, tmp_path, monkeypatch):
        p = tmp_path / "d.json"
        save(flat(0.1, steps=5), p)
        os.chmod(p, 0o644)
        before = p.read_text()

        def boom(*a, **k):
            raise OSError("disk full")
        monkeypatch.setattr(os, "fsync", boom)
        with pytest.raises(OSError, match="disk full"):
            save(flat(0.2, steps=5), p)
        assert p.read_text() == before and [q.name for q in tmp_path.iterdir()] == ["d.json"]


def test_valid_load_is_fast_enough_to_not_hang():
    """A 1,000-stage spec loads well under a second per hundred stages (a hang check, not a benchmark)."""
    s = stages(*[cosine(0.1, steps=10 + i) for i in range(1000)])
    d = s.to_spec()
    t0 = time.perf_counter()
    assert from_spec(d) == s
    assert time.perf_counter() - t0 < 10
