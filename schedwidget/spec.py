"""Schedules as data: versioned JSON specs, the shipped JSON Schema, atomic save and safe load.

A spec file looks like::

    {"version": 1, "unit": "step", "steps_per_epoch": 1150,
     "schedule": {"kind": "warmup", "steps": 5750, "start": 0.0, "curve": "linear",
                  "target": {"kind": "cosine", "peak": 0.1, "floor": 0.0, "steps": 97750}}}

Loading parses JSON, validates it against the schema and rebuilds the value
through one registry of kinds; nothing in a spec is ever executed.

Limits (each stated in its message): a spec file is a regular file of at most
``MAX_SPEC_BYTES`` (16 MiB); schedules nest at most ``MAX_DEPTH`` (48) deep; a
spec holds at most ``MAX_VALUES`` JSON values and a design at most ``MAX_NODES``
schedules; every integer fits a float (``|n| < 2**1024``, at most 309 digits).
Paths are ``str`` or ``os.PathLike`` (bytes paths and file descriptors are refused).

Validation has two routes with one outcome: a spec made of plain JSON values is
checked by predicates compiled once from the shipped schema (exactly its rules);
only a spec they reject (or one holding other Python types) goes to ``jsonschema``,
which is imported then, for its messages.
"""

from __future__ import annotations

import dataclasses
import json
import os
import stat
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .schedule import KINDS, Schedule, ScheduleError, as_whole, complain
from .schema import FORMAT_VERSION, SCHEMA_FILE, UNITS, json_schema, shipped_schema  # noqa: F401
from .spec_check import (  # noqa: F401 - the limits and checks, importable from here as before
    INT_LIMIT, MAX_DEPTH, MAX_JSON_DEPTH, MAX_NODES, MAX_SPEC_BYTES, MAX_VALUES, _check_schema, _parse_int,
    _problems, _type_words, _where)
from .predicates import _accepts  # noqa: F401 - tests reach the compiled predicates through spec

__all__ = ["FORMAT_VERSION", "Design", "to_spec", "from_spec", "read_design", "save", "load", "load_design",
           "json_schema", "KINDS", "MAX_DEPTH", "MAX_SPEC_BYTES", "MAX_VALUES", "MAX_NODES", "read_file"]


@dataclass(frozen=True)
class Design:
    """A schedule with the unit of its clock, as stored in a spec file."""

    schedule: Schedule
    unit: str = "step"
    steps_per_epoch: int | None = None
    #: the whole value when the spec holds more than one rate design: ``tracks(...)`` or ``per_group(...)``
    #: (``schedule`` is then its rate, or the first group's rate); None for a single schedule.
    tracks: Any = None


# ------------------------------------------------------------------- writing
def _node(s: Schedule) -> dict[str, Any]:
    out: dict[str, Any] = {"kind": s.kind}
    for name, p in type(s).params().items():
        out[name] = p.encode(getattr(s, name), _node)  # each parameter kind writes its own values
    return out


def _check_size(s: Schedule, owner: str, room: int = MAX_DEPTH, seen: int = 0) -> int:
    """Refuse a design a spec file cannot hold: deeper than ``room`` (MAX_DEPTH, less the objects a spec of
    tracks or groups puts above it) or with more than MAX_NODES schedules counting ``seen`` (the objects
    written before it in the same spec); the new count.

    Walks the design without recursion, so any design gets an answer in bounded time
    (a design that reuses one sub-design many times is counted as the tree it writes).
    """
    todo = [(s, 1)]
    while todo:
        node, level = todo.pop()
        seen += 1
        if level > room:
            raise complain(owner, "s", f"a design more than {room} schedules deep",
                           f"at most {room} nested schedules (the limit of spec files)",
                           "a design this deep is almost certainly built by mistake, e.g. in a loop")
        if seen > MAX_NODES:
            raise complain(owner, "s", f"a design of more than {MAX_NODES:,} schedules",
                           f"at most {MAX_NODES:,} schedules (the limit of spec files)")
        todo.extend((c, level + 1) for c in node.children())
    return seen


def _group_node(t: Any, name: str | None, owner: str, count: list[int], above: int,
                always: bool = False) -> dict[str, Any]:
    """A group's rate under "schedule" and its other tracks under "tracks" (written even when empty with
    ``always``: a top-level tracks(rate) reads back as tracks, not as a bare schedule).

    ``above`` is the objects the spec holds above the rate (0 at the top level, 1 in a group), each design's
    room for nesting is that much less, and ``count`` carries the objects written so far (the loader's limits).
    """
    count[0] = _check_size(t.rate, owner, MAX_DEPTH - above, count[0] + above + 1)
    out: dict[str, Any] = {} if name is None else {"name": name}
    out["schedule"] = _node(t.rate)
    more = {}
    for track, s in t.items():
        if track != "rate":
            count[0] = _check_size(s, owner, MAX_DEPTH - above - 1, count[0])
            more[track] = _node(s)
    if more or always:
        out["tracks"] = more
    return out


def to_spec(s: Any, unit: str | None = None, steps_per_epoch: int | None = None) -> dict[str, Any]:
    """Plain-JSON spec of ``s`` with the format version (and the clock's unit when given).

    ``s`` must be a Schedule at most ``MAX_DEPTH`` deep with at most ``MAX_NODES``
    schedules (what a spec file may hold), ``tracks(...)`` (the rate under
    ``"schedule"``, the other tracks under ``"tracks"``) or ``per_group(...)``
    (a list under ``"groups"``); anything else is a ScheduleError.
    """
    from .tracks import GroupDesigns, Tracks

    if not isinstance(s, (Schedule, Tracks, GroupDesigns)):  # tracks and per-group designs are left unsaid:
        # tests/test_trust_io.py pins this message word for word
        raise complain("to_spec", "s", None if s is None else _type_words(s),
                       "a Schedule (built with flat, cosine, stages, ...)")
    if isinstance(s, Schedule):
        _check_size(s, "to_spec")
    spec: dict[str, Any] = {"version": FORMAT_VERSION}
    if unit is not None:
        if not isinstance(unit, str) or unit not in UNITS:  # an array or a 5,000-digit int: compare and show safely
            raise complain("to_spec", "unit", unit, "one of 'step', 'epoch'")
        spec["unit"] = unit
    if steps_per_epoch is not None:
        spe = as_whole(steps_per_epoch)
        if spe is None or spe < 1:
            raise complain("to_spec", "steps_per_epoch", steps_per_epoch, "a whole number >= 1 or None")
        spec["steps_per_epoch"] = spe
    if isinstance(s, Schedule):
        spec["schedule"] = _node(s)
    elif isinstance(s, Tracks):
        spec.update(_group_node(s, None, "to_spec", [0], 0, always=True))
    else:
        count = [0]
        spec["groups"] = [_group_node(t, None if s.names is None else s.names[i], "to_spec", count, 1)
                          for i, t in enumerate(s.groups)]
    return spec


def _build(node: dict[str, Any], where: str) -> Schedule:
    cls = KINDS[node["kind"]]
    kwargs: dict[str, Any] = {}
    for name, p in cls.params().items():
        if name not in node:
            continue
        kwargs[name] = p.decode(node[name], _build, f"{where}.{name}")  # each parameter kind reads its own
    try:
        return cls(**kwargs)
    except ScheduleError as exc:
        raise ScheduleError(f"spec: {where}: {exc}") from None
    except (ArithmeticError, TypeError, ValueError) as exc:  # a constructor's check that is not a ScheduleError yet
        raise ScheduleError(f"spec: {where}: {node['kind']} cannot be built from these values "
                            f"({type(exc).__name__}: {exc})") from None


def read_design(d: Any) -> Design:
    """Validate a parsed spec and rebuild its Design (schedule, unit, steps per epoch).

    Any input gets a Design or a ScheduleError, in bounded time (see the module's limits).
    """
    if isinstance(d, dict) and "schedule" not in d and "groups" not in d and "version" in d:
        raise ScheduleError("spec: a spec must hold 'schedule' (one design, with optional 'tracks') or 'groups' "
                            "(one design per param group), got neither (rebuild the file with schedwidget.save)")
    _check_schema(d)
    unit, spe = d.get("unit", "step"), d.get("steps_per_epoch")
    if "groups" in d and ("schedule" in d or "tracks" in d):
        raise ScheduleError("spec: a spec holds either 'schedule' (one design, with optional 'tracks') or "
                            "'groups' (one design per param group), got both (keep one of them)")
    if "groups" in d:
        from .tracks import GroupDesigns

        groups = [_build_group(g, f"groups[{i}]") for i, g in enumerate(d["groups"])]
        names = [g.get("name") for g in d["groups"]]
        if any(n is None for n in names) and any(n is not None for n in names):
            raise ScheduleError("spec: groups: either every group has a 'name' or none has, got names for "
                                f"{sum(n is not None for n in names)} of {len(names)} groups")
        try:
            value = GroupDesigns(tuple(groups), None if names[0] is None else tuple(names))
        except ScheduleError as exc:
            raise ScheduleError(f"spec: groups: {exc}") from None
        return Design(value.groups[0].rate, unit, spe, value)
    if "tracks" in d:
        value = _build_group(d, "")
        return Design(value.rate, unit, spe, value)
    return Design(_build(d["schedule"], "schedule"), unit, spe)


def _build_group(g: dict[str, Any], where: str) -> Any:
    """tracks(...) from a node holding "schedule" and optional "tracks" (each checked for its range)."""
    from .tracks import Tracks

    dot = f"{where}." if where else ""
    rate = _build(g["schedule"], f"{dot}schedule")
    more = {name: _build(node, f"{dot}tracks.{name}") for name, node in g.get("tracks", {}).items()}
    try:
        return Tracks(rate, **more)
    except ScheduleError as exc:  # the message starts with "tracks: ..."
        raise ScheduleError(f"spec: {where}: {exc}" if where else f"spec: {exc}") from None


def _one(design: Design, owner: str, reader: str) -> Schedule:
    """The design's schedule; a spec of tracks or groups is refused (callers of from_spec and load expect one
    schedule: a checkpoint's factor, the command line), pointing to the readers that return the whole value."""
    if design.tracks is not None:
        raise ScheduleError(f"{owner}: the spec must hold one schedule, got tracks or one design per param group "
                            f"(read those with schedwidget.tracks.{reader}, or read_design(...).tracks)")
    return design.schedule


def from_spec(d: Any) -> Schedule:
    """Rebuild a schedule from its spec (validated first; nothing is executed).

    A spec of tracks or per-group designs is read by ``schedwidget.tracks.tracks_from_spec``.
    """
    return _one(read_design(d), "spec", "tracks_from_spec(d)")


def check_path(owner: str, path: Any, name: str = "path") -> str:
    """``path`` as a str file path: a ``str`` or an ``os.PathLike`` that gives one; anything else is refused."""
    if isinstance(path, str) or (isinstance(path, os.PathLike) and not isinstance(path, bytes)):
        try:
            out = os.fspath(path)
        except TypeError:
            out = None
        if isinstance(out, str) and out and "\0" not in out:
            return out
    raise complain(owner, name, path if isinstance(path, (str, bytes, int)) else _type_words(path),
                   "a file path: a non-empty str or os.PathLike such as pathlib.Path",
                   "bytes paths and file descriptors are not accepted; decode bytes with os.fsdecode")


def _kind_of(mode: int) -> str:
    for test, words in ((stat.S_ISDIR, "a folder"), (stat.S_ISFIFO, "a pipe (FIFO)"),
                        (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"),
                        (stat.S_ISSOCK, "a socket")):
        if test(mode):
            return words
    return "not a regular file"


def read_file(path: Any, owner: str, name: str = "path", cap: int = MAX_SPEC_BYTES,
              what: str = "name an existing file", folder: str = "it is a folder") -> bytes:
    """The bytes of a regular file of at most ``cap`` bytes, read without ever blocking.

    The path is checked with ``os.stat`` before it is opened, so a pipe, a device
    or a socket (which may never end, or never start) is refused with a message;
    the file is opened non-blocking and checked again on the open descriptor, and
    at most ``cap + 1`` bytes are read, so a file that grows meanwhile is refused too.
    Messages read ``"{owner}: {name} must {what}, got '...' (why)"``.
    """
    p = check_path(owner, path, name)

    def refuse(why: str) -> ScheduleError:
        return ScheduleError(f"{owner}: {name} must {what}, got {p!r} ({why})")

    try:
        st = os.stat(p)
    except FileNotFoundError:
        raise refuse(f"no such file; relative paths start at {os.getcwd()}") from None
    except OSError as exc:
        raise refuse(f"it cannot be read: {exc.strerror or type(exc).__name__}") from None
    if not stat.S_ISREG(st.st_mode):
        kind = _kind_of(st.st_mode)
        raise refuse(folder if kind == "a folder" else
                     f"it is {kind}; only regular files are read, since a pipe or a device may never end")
    too_big = f"{{:,}} bytes; at most {cap:,} bytes ({cap / 2 ** 20:g} MiB) are read"
    if st.st_size > cap:
        raise refuse("it has " + too_big.format(st.st_size))
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0) | getattr(os, "O_CLOEXEC", 0)
    try:
        fd = os.open(p, flags)
    except OSError as exc:
        raise refuse(f"it cannot be opened: {exc.strerror or type(exc).__name__}") from None
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):  # replaced by something else since the stat
            raise refuse("it is no longer a regular file")
        chunks, size = [], 0
        while size <= cap:
            chunk = os.read(fd, min(cap + 1 - size, 1 << 20))
            if not chunk:
                break
            chunks.append(chunk)
            size += len(chunk)
    except OSError as exc:
        raise refuse(f"reading it failed: {exc.strerror or type(exc).__name__}") from None
    finally:
        os.close(fd)
    if size > cap:
        raise refuse("it grew past " + too_big.format(cap))
    return b"".join(chunks)


def _read(path: Any, owner: str = "load") -> Any:
    data = read_file(path, owner, cap=MAX_SPEC_BYTES, folder="it is a folder, which cannot be read as a spec")
    shown = repr(os.fspath(path))
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ScheduleError(f"{owner}: {shown} cannot be read as UTF-8 text (byte {exc.start:,}: {exc.reason})") \
            from None
    try:
        return json.loads(text, parse_int=_parse_int)
    except json.JSONDecodeError as exc:
        raise ScheduleError(f"{owner}: {shown} is not JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})") \
            from None
    except RecursionError:
        raise ScheduleError(f"{owner}: {shown} nests JSON arrays or objects too deeply to read; a spec nests at most "
                            f"{MAX_JSON_DEPTH} levels ({MAX_DEPTH} schedules)") from None


def load_design(path: str | os.PathLike) -> Design:
    """Read a spec file into a Design.

    ``path`` is a ``str`` or ``os.PathLike`` naming a regular file of at most
    MAX_SPEC_BYTES (16 MiB); bytes paths, file descriptors, pipes and devices are
    refused with a ScheduleError, as is anything over the module's other limits.
    """
    return read_design(_read(path, "load"))


def load(path: str | os.PathLike) -> Schedule:
    """Read a spec file into a Schedule (validated; loading never runs code).

    A file of tracks or per-group designs is read by ``schedwidget.tracks.load_tracks``.
    """
    return _one(load_design(path), "load", "load_tracks(path)")


def save(s: Schedule, path: str | os.PathLike, unit: str | None = None,
         steps_per_epoch: int | None = None) -> Path:
    """Write ``s`` as a spec file atomically: a temporary file in the same folder, then a rename.

    An existing file is replaced only once the new one is complete, so a crash
    mid-write never leaves half a design on disk.  A replaced file keeps its
    permission bits; a new file gets the usual ones (0666 less the umask).  A
    symbolic link is written through: its target is replaced and the link stays.
    Only a regular file (or a new name) can be written.
    """
    from .tracks import GroupDesigns, Tracks

    if not isinstance(s, (Schedule, Tracks, GroupDesigns)):
        raise ScheduleError(f"save: s must be a Schedule, tracks(...) or per_group(...), got {type(s).__name__}")
    target = Path(check_path("save", path))
    text = json.dumps(to_spec(s, unit, steps_per_epoch), indent=2) + "\n"
    write_atomic(target, text, owner="save")
    return target


def write_atomic(target: Path, text: str, owner: str = "save", name: str = "path") -> None:
    """Write ``text`` to a temporary file beside the file ``target`` names, then rename it over that file.

    A symbolic link is followed to the file it names (which is replaced; the link
    stays).  The new file keeps the permission bits of the one it replaces, or for
    a new file 0666 less the umask (the kernel applies the umask at creation).
    Anything but a regular file (a folder, a pipe, a device) is refused.
    """
    shown = str(target)
    real = Path(os.path.realpath(target))
    if not real.parent.is_dir():
        raise complain(owner, name, shown, "in an existing folder",
                       None if real == Path(os.path.abspath(target)) else f"the link leads to {str(real)!r}")
    try:
        st = os.stat(real)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise complain(owner, name, shown, "a writable file", exc.strerror or type(exc).__name__) from None
    if st is not None and not stat.S_ISREG(st.st_mode):
        raise complain(owner, name, shown, "a regular file or a new name", f"it is {_kind_of(st.st_mode)}")
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0) | getattr(os, "O_NOFOLLOW", 0)
    for _ in range(100):
        tmp = real.parent / f".{real.name}.{os.urandom(4).hex()}.tmp"  # not secrets: it loads OpenSSL (~10 ms)
        try:
            fd = os.open(tmp, flags, 0o666)
            break
        except FileExistsError:
            continue
    else:  # pragma: no cover - 100 collisions of 32 random bits
        raise complain(owner, name, shown, "a file whose folder accepts a temporary file",
                       "100 temporary names were taken")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            if st is not None:
                os.fchmod(fh.fileno(), stat.S_IMODE(st.st_mode))
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, real)
    except BaseException:
        if os.path.lexists(tmp):
            os.unlink(tmp)
        raise
    _sync_folder(real.parent)


def _sync_folder(folder: Path) -> None:
    """Flush the rename to disk where the platform allows it (best effort)."""
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
