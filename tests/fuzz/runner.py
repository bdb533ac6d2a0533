"""The case runner: every outcome is a value that passes ``checks.check`` or a ``ScheduleError``, in under 1 s.

Cases run in a forked child process, one after another, each under an
alarm of ``LIMIT`` seconds of CPU time; warnings are errors there, as in the
test run.  The child has its own address-space limit, so a case that tries to
allocate terabytes gets a MemoryError instead of taking the machine.  If a case
is stuck where the alarm cannot interrupt it (inside C code), the parent kills
the child after ``HARD_LIMIT`` seconds, records the case as a timeout and starts
a new child at the next case.
"""

from __future__ import annotations

import os
import pickle
import select
import signal
import struct
import sys
import time
import warnings
from collections import Counter
from dataclasses import dataclass, field
from typing import Any, Callable

from schedwidget.schedule import ScheduleError

from .atoms import PRELUDE
from .checks import PHASE, Broken, check, phase

#: What the checks of a returned schedule do, for repros of failures found by a check rather than by the call.
CHECKED = ("s = the schedule; repr(s); s(t) for t in 0, 1, n-1, n, n+1, 2n, 2**53 and s(array of 4001 ticks "
           "over [0, 2n]); exec(to_python(s)) and lr_at(t); torch_factor(s, 0.1)(t); facts(s); n = s.length")

#: Seconds a case may take (the promise: every input gets its answer fast).
LIMIT = 1.0
#: Seconds after which a case that ignores the alarm is killed with its process.
HARD_LIMIT = 6.0
#: Extra address space the child may use beyond what it holds at the fork.
MEMORY_HEADROOM = 3 * 2 ** 30


@dataclass
class Case:
    """One fuzz case: a call, the generator that made it and a repro (Python source)."""

    generator: str
    call: Callable[[], Any]
    repro: str
    check: Callable[[Any], None] = check


@dataclass
class Outcome:
    """What one case did: ``value``, ``ScheduleError`` or ``failure`` (with its class and message)."""

    index: int
    outcome: str
    seconds: float
    klass: str = ""
    message: str = ""
    cpu: float = 0.0
    phase: str = "the call"


class CaseTimeout(BaseException):
    """Raised by the alarm: a BaseException, so no ``except Exception`` in the library can swallow it."""


def _on_alarm(signum, frame):
    raise CaseTimeout


def _frames(tb) -> list[tuple[str, str]]:
    """(file, qualified function) of every frame of a traceback, outermost first, the runner's own left out."""
    out = []
    while tb is not None:
        code = tb.tb_frame.f_code
        name = code.co_filename.replace("\\", "/")
        if not name.endswith("fuzz/runner.py"):
            if "/schedwidget/" in name:
                name = "schedwidget/" + name.rsplit("/schedwidget/", 1)[1]
            elif "/tests/" in name:
                name = "tests/" + name.rsplit("/tests/", 1)[1]
            elif "site-packages/" in name:
                name = name.rsplit("site-packages/", 1)[1]
            out.append((name, getattr(code, "co_qualname", code.co_name)))
        tb = tb.tb_next
    return out


def _ours(name: str) -> bool:
    """A frame of the library or of code it generated (``<generated ...>``, ``<schedwidget ...>``)."""
    return name.startswith(("schedwidget/", "<generated", "<schedwidget"))


def where(tb, outermost: bool = False) -> str:
    """The innermost (or outermost) frame inside schedwidget or generated code, as ``file:function``."""
    frames = _frames(tb)
    mine = [f for f in frames if _ours(f[0])]
    pick = (mine[0] if outermost else mine[-1]) if mine else (frames[-1] if frames else ("?", "?"))
    return f"{pick[0]}:{pick[1]}"


def _type(exc: BaseException) -> str:
    t = type(exc)
    return t.__name__ if t.__module__ == "builtins" else f"{t.__module__}.{t.__qualname__}"


def run_one(i: int, case: Case) -> Outcome:
    """Run ``case`` under the alarm with warnings as errors; classify what happened.

    The alarm counts the process's CPU time (``ITIMER_PROF``), so other work
    on a shared machine does not turn a fast case into a timeout; a case that
    waits without computing (a blocking read) is caught by the parent's wall
    clock instead (``HARD_LIMIT``).
    """
    t0, c0 = time.perf_counter(), time.process_time()
    phase("the call")
    signal.setitimer(signal.ITIMER_PROF, LIMIT)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            case.check(case.call())
        outcome, klass, message = "value", "", ""
    except CaseTimeout as exc:
        # the public function that was running names the class; the frame the alarm hit goes in the message
        outcome = "failure"
        klass = f"timeout > {LIMIT:g} s CPU in {PHASE[0]}: {where(exc.__traceback__, outermost=True)}"
        message = f"interrupted in {where(exc.__traceback__)}" + (f"; {PHASE[1]}" if PHASE[1] else "")
    except ScheduleError:
        outcome, klass, message = "ScheduleError", "", ""
    except Broken as exc:
        outcome, klass, message = "failure", f"{exc.route}: {exc.what}", exc.detail
    except BaseException as exc:  # noqa: BLE001 - everything else is what the suite looks for
        outcome = "failure"
        klass = f"{_type(exc)} in {where(exc.__traceback__)}"
        try:
            message = f"{exc}"[:300] + f" (called from {where(exc.__traceback__, outermost=True)})"
        except Exception:  # noqa: BLE001 - a message that cannot be printed (a 5000-digit int)
            message = "<unprintable message>"
    finally:
        signal.setitimer(signal.ITIMER_PROF, 0)
    seconds, cpu = time.perf_counter() - t0, time.process_time() - c0
    if outcome != "failure" and cpu > LIMIT:
        outcome, klass = "failure", f"timeout > {LIMIT:g} s CPU in {PHASE[0]} (alarm not honoured)"
        message = f"{cpu:.2f} s CPU"
    return Outcome(i, outcome, seconds, klass, message, cpu, PHASE[0])


# ------------------------------------------------------------------ isolation
def _send(fd: int, obj: Any) -> None:
    data = pickle.dumps(obj)
    os.write(fd, struct.pack("<I", len(data)) + data)


def _child(cases: list[Case], start: int, fd: int, cwd) -> None:
    if cwd is not None:
        os.chdir(cwd)  # relative paths a case may write land in the suite's temporary folder
    try:
        import resource

        with open("/proc/self/statm") as fh:
            vm = int(fh.read().split()[0]) * os.sysconf("SC_PAGE_SIZE")
        resource.setrlimit(resource.RLIMIT_AS, (vm + MEMORY_HEADROOM, resource.RLIM_INFINITY))
    except (OSError, ValueError, ImportError):
        pass
    signal.signal(signal.SIGPROF, _on_alarm)
    sys.setrecursionlimit(max(sys.getrecursionlimit(), 1000))
    for i in range(start, len(cases)):
        out = run_one(i, cases[i])
        _send(fd, out)


def _read_exact(fd: int, n: int, deadline: float) -> bytes | None:
    """``n`` bytes from the pipe; ``None`` when the deadline passes, ``b""`` when the child is gone."""
    buf = b""
    while len(buf) < n:
        left = deadline - time.monotonic()
        if left <= 0:
            return None
        ready, _, _ = select.select([fd], [], [], left)
        if not ready:
            return None
        chunk = os.read(fd, n - len(buf))
        if not chunk:
            return b""
        buf += chunk
    return buf


def warm() -> None:
    """Load what the library loads lazily on first use (the spec validator, generated-code caches).

    A one-time import is not a per-case cost: without this the first case of
    every child would pay it and could hit its alarm half-way through an import.
    """
    import random

    import schedwidget as sw
    from schedwidget.spec import KINDS

    from .designs import design

    rng = random.Random(0)
    for kind in KINDS:  # the spec loader builds one validator per kind on first use, for valid and bad specs
        spec = sw.to_spec(design(rng, depth=1, kind=kind))
        bad = {**spec, "schedule": {**spec["schedule"], "unknown field": 1}}
        for d in (spec, bad, {**spec, "version": "1"}):
            try:
                sw.from_spec(d)
            except ScheduleError:  # judged by the cases, not here
                pass
    s = sw.from_spec(sw.to_spec(sw.warmup(sw.cosine(0.1, steps=100), steps=10)))
    exec(sw.to_python(s), {})
    sw.torch_factor(s, 0.1)(5)
    sw.facts(s)
    sw.read_metric(b"a\n0.5\n")
    sw.replay_plateau([0.5, 0.6], 0.1)
    sw.plateau_source(0.1)


def run_cases(cases: list[Case], isolate: bool = True, progress: Callable[[int], None] | None = None,
              cwd: Any = None) -> list[Outcome]:
    """Run every case; return one Outcome per case, in order."""
    warm()
    if not isolate:
        old = signal.signal(signal.SIGPROF, _on_alarm)
        try:
            return [run_one(i, c) for i, c in enumerate(cases)]
        finally:
            signal.signal(signal.SIGPROF, old)
    if "jax" in sys.modules:  # a forked child of a multithreaded JAX process may deadlock (JAX warns at every fork)
        raise RuntimeError("the fuzz runner forks one child per batch of cases: run it before JAX is imported "
                           "(tests/conftest.py runs the JAX and Keras checks last)")
    results: list[Outcome] = []
    start = 0
    while start < len(cases):
        r, w = os.pipe()
        sys.stdout.flush()
        sys.stderr.flush()
        pid = os.fork()
        if pid == 0:  # the child: run, report, and leave without running the parent's cleanup
            os.close(r)
            code = 0
            try:
                _child(cases, start, w, cwd)
            except BaseException:  # noqa: BLE001
                code = 1
            finally:
                os._exit(code)
        os.close(w)
        hung = False
        try:
            while start < len(cases):
                head = _read_exact(r, 4, time.monotonic() + HARD_LIMIT)
                body = head if not head else _read_exact(r, struct.unpack("<I", head)[0],
                                                         time.monotonic() + HARD_LIMIT)
                if not body:
                    hung = body is None
                    break
                out = pickle.loads(body)
                results.append(out)
                start = out.index + 1
                if progress:
                    progress(start)
        finally:
            os.close(r)
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
            _, status = os.waitpid(pid, 0)
        if start < len(cases):  # the case in flight hung past the alarm or killed its process
            if hung:
                why = f"no answer in {HARD_LIMIT:g} s wall clock (waiting without computing, or stuck in C code)"
            elif os.WIFSIGNALED(status):
                why = f"the process was killed by signal {os.WTERMSIG(status)}"
            else:
                why = f"the process exited with status {os.WEXITSTATUS(status)}"
            results.append(Outcome(start, "failure", HARD_LIMIT, f"hang or crash: {why}", ""))
            start += 1
    return results


# ------------------------------------------------------------------ reports
@dataclass
class FailureClass:
    klass: str
    count: int = 0
    generators: Counter = field(default_factory=Counter)
    repro: str = ""
    message: str = ""
    phase: str = "the call"


@dataclass
class Report:
    cases: list[Case]
    outcomes: list[Outcome]
    seconds: float
    seed: int

    def table(self) -> dict[str, Counter]:
        out: dict[str, Counter] = {}
        for c, o in zip(self.cases, self.outcomes):
            out.setdefault(c.generator, Counter())[o.outcome] += 1
        return out

    def slowest(self) -> dict[str, float]:
        out: dict[str, float] = {}
        for c, o in zip(self.cases, self.outcomes):
            out[c.generator] = max(out.get(c.generator, 0.0), o.cpu)
        return out

    def failures(self) -> list[FailureClass]:
        found: dict[str, FailureClass] = {}
        for c, o in zip(self.cases, self.outcomes):
            if o.outcome != "failure":
                continue
            fc = found.setdefault(o.klass, FailureClass(o.klass))
            fc.count += 1
            fc.generators[c.generator] += 1
            if not fc.repro or len(c.repro) < len(fc.repro):
                fc.repro, fc.message, fc.phase = c.repro, o.message, o.phase
        return sorted(found.values(), key=lambda f: -f.count)

    def text_table(self) -> str:
        lines = [f"{'generator':<16}{'cases':>7}{'value':>8}{'ScheduleError':>15}{'failure':>9}"
                 f"{'CPU s':>8}{'max CPU s':>11}"]
        tot = Counter()
        slow = self.slowest()
        cpu: Counter = Counter()
        for c, o in zip(self.cases, self.outcomes):
            cpu[c.generator] += o.cpu
        for gen, cnt in self.table().items():
            n = sum(cnt.values())
            tot.update(cnt)
            lines.append(f"{gen:<16}{n:>7}{cnt['value']:>8}{cnt['ScheduleError']:>15}{cnt['failure']:>9}"
                         f"{cpu[gen]:>8.1f}{slow[gen]:>11.3f}")
        lines.append(f"{'total':<16}{sum(tot.values()):>7}{tot['value']:>8}{tot['ScheduleError']:>15}"
                     f"{tot['failure']:>9}{sum(cpu.values()):>8.1f}{max(slow.values(), default=0):>11.3f}")
        lines.append(f"seed {self.seed}; {self.seconds:.1f} s wall clock in all, generation included "
                     "(CPU s: the cases' own CPU time; the 1 s limit per case is CPU time)")
        return "\n".join(lines)

    def text_failures(self, limit: int = 2000) -> str:
        parts = []
        for fc in self.failures():
            gens = ", ".join(f"{g} x{n}" for g, n in fc.generators.most_common())
            repro = fc.repro if len(fc.repro) <= limit else fc.repro[:limit] + "\n# ... (cut)"
            if fc.phase != "the call":
                repro += f"\n# fails in the suite's check: {fc.phase} ({CHECKED})"
            parts.append(f"### {fc.klass}  ({fc.count} cases: {gens})\n"
                         + (f"{fc.message}\n" if fc.message else "") + f"```python\n{repro}\n```")
        return "\n\n".join(parts)

    def markdown(self) -> str:
        when = time.strftime("%Y-%m-%d %H:%M:%S %Z")
        fails = self.failures()
        head = (f"# Fuzz findings ({when})\n\n`python -m tests.fuzz` (seed {self.seed}); every repro assumes:\n\n"
                f"```python\n{PRELUDE}```\n\n## Counts by outcome\n\n```\n{self.text_table()}\n```\n\n"
                f"## Failure classes still open: {len(fails)}\n\n")
        return head + (self.text_failures() if fails else "None.") + "\n"
