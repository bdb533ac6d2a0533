"""Running a learning-rate range test on the user's own model, loader, loss and optimizer (torch never imported).

The rate grows exponentially from ``lowest`` to ``highest`` over ``updates`` updates (Smith 2017, section 3.3
sweeps the rate linearly; an exponential sweep gives every decade the same number of updates, which is what a
reading on a log-rate axis needs).  Everything here calls the objects' own methods (``state_dict``,
``load_state_dict``, ``parameters``, ``zero_grad``, ``backward``, ``step``, ``param_groups``), so the core stays
free of torch.  The model's and the optimizer's state are restored exactly afterwards, also when the run stops on
an exception.
"""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from .params import complain
from .range_input import MAX_POINTS, MIN_POINTS, MIN_SPAN
from .range_test import RangeReading, read_range_test

OWNER = "run_range_test"

#: Weight of the past in the running mean that the blow-up rule watches (0.9: ours, no source).
RUNNING_WEIGHT = 0.9

_END = object()


def sweep_rates(lowest: float, highest: float, updates: int) -> np.ndarray:
    """The rates of an exponential sweep: ``lowest * (highest / lowest) ** (k / (updates - 1))``, k = 0 .. updates-1.

    The closed form (no repeated multiplication), with the ends exactly ``lowest`` and ``highest``: the same
    rates as ``ramp(lowest, highest, updates - 1, curve="geometric")`` to rounding.

    >>> r = sweep_rates(1e-6, 1e3, 10)
    >>> float(r[0]), float(r[-1]), round(float(r[2]), 12)
    (1e-06, 1000.0, 0.0001)
    """
    lo = _rate("lowest", lowest)
    hi = _rate("highest", highest)
    if not hi >= lo * MIN_SPAN:
        raise complain(OWNER, "highest", highest, f">= {MIN_SPAN:g} * lowest = {lo * MIN_SPAN!r}",
                       "a range test sweeps the rate over several decades, e.g. lowest=1e-7, highest=10")
    n = _updates(updates)
    rates = lo * np.power(hi / lo, np.arange(n) / (n - 1))
    rates[-1] = hi
    return rates


def _rate(name: str, value: Any) -> float:
    ok = isinstance(value, (int, float, np.floating, np.integer)) and not isinstance(value, bool)
    if ok and isinstance(value, int) and abs(value) > 10 ** 101:  # float() of a huge int overflows: refuse it first
        ok = False
    if not ok or not (0.0 < float(value) <= 1e100):
        raise complain(OWNER, name, value, "a rate in (0, 1e+100]")
    return float(value)


def _updates(value: Any) -> int:
    ok = isinstance(value, (int, np.integer)) and not isinstance(value, bool)
    if not ok or not (MIN_POINTS <= int(value) <= MAX_POINTS):
        raise complain(OWNER, "updates", value, f"a whole number in [{MIN_POINTS}, {MAX_POINTS:,}]",
                       "a few hundred updates are usual; the reading needs at least "
                       f"{MIN_POINTS} losses")
    return int(value)


@dataclass(frozen=True, eq=False)
class RangeRun:
    """What a range test run logged: the rate and the loss of each update, and why it stopped.

    ``losses[k]`` is the batch's loss computed with the weights before update k, which then used ``rates[k]``.
    ``stopped`` is ``"budget"`` (all updates ran), ``"not finite"`` (the last loss was nan/inf and that update
    was not taken), ``"blew up"`` (the running mean passed ``stop_above`` times its lowest) or ``"loader ended"``
    (a one-shot iterator ran out).  ``planned`` is the whole sweep.
    """

    rates: np.ndarray
    losses: np.ndarray
    planned: np.ndarray
    stopped: str
    stop_above: float | None

    def read(self, **options: Any) -> RangeReading:
        """``read_range_test`` on this log (options: ``window``, ``onset``, ``ragged``)."""
        return read_range_test(self.rates, self.losses, **options)

    def __str__(self) -> str:
        done, planned = self.rates.size, self.planned.size
        last = f", last loss {self.losses[-1]:.4g}" if done else ""
        return (f"range test run: {done} of {planned} updates, rates {self.planned[0]:.3g} .. "
                f"{self.planned[-1]:.3g} (exponential); stopped: {self.stopped}{last}")


def _needs(owner_name: str, obj: Any, methods: tuple[str, ...], what: str) -> None:
    missing = [m for m in methods if not hasattr(obj, m)]
    if missing:
        raise complain(OWNER, owner_name, f"a {type(obj).__name__}", what, f"it has no {', '.join(missing)}")


def run_range_test(model: Any, loader: Any, loss_fn: Callable[..., Any] | None, optimizer: Any, *,
                   updates: int = 100, lowest: float = 1e-7, highest: float = 10.0,
                   stop_above: float | None = 4.0,
                   loss_of: Callable[[Any, Any], Any] | None = None) -> RangeRun:
    """Train for up to ``updates`` updates with the rate growing exponentially, log (rate, loss), restore state.

    Parameters
    ----------
    model, optimizer
        The user's objects (a torch module and optimizer, or anything with the same methods).  Before the run
        their ``state_dict()`` are deep-copied (and every parameter's ``.grad`` cloned, the model's training
        flag noted); afterwards, in a ``finally``, both are loaded back, so weights, buffers, optimizer state,
        its rates and the gradients are as before, also when the run raises.  Random number generators are not
        restored (dropout and shuffling move them on; seed them for a repeatable test).
    loader
        Any iterable of batches; it is iterated again when it ends (a one-shot iterator ends the run).
    loss_fn
        Called as ``loss_fn(model(inputs), targets)`` for a batch ``(inputs, targets)``.
    loss_of
        Instead of ``loss_fn``: ``loss_of(model, batch)`` returns the loss, for batches of any other form.
    updates, lowest, highest
        The sweep: ``sweep_rates(lowest, highest, updates)``; every param group gets the same rate.
    stop_above
        Early stop (our rule): the run stops after an update whose loss is nan/inf (that update is not taken), or
        whose running mean (an exponential mean with weight 0.9 on the past, bias-corrected) exceeds
        ``stop_above`` times the lowest running mean so far, when that lowest is > 0 (4: common practice, no
        source).  ``None`` keeps only the nan/inf rule.

    Returns
    -------
    RangeRun
        The log; ``.read()`` gives the readings.

    Examples
    --------
    With torch in the user's own code (never imported here)::

        run = run_range_test(model, train_loader, torch.nn.CrossEntropyLoss(), optimizer, updates=300)
        reading = run.read()
        print(reading)                        # the readings, the evidence and the smoothing used
        design = reading.design(steps=90 * 1150)   # one_cycle between the published bounds
    """
    rates = sweep_rates(lowest, highest, updates)
    if stop_above is not None:
        ok = isinstance(stop_above, (int, float, np.floating, np.integer)) and not isinstance(stop_above, bool)
        ok = ok and not (isinstance(stop_above, int) and abs(stop_above) > 10 ** 300)  # float() would overflow
        if not ok or not (1.0 < float(stop_above) <= 1e6):
            raise complain(OWNER, "stop_above", stop_above, "None or a factor in (1, 1e6]",
                           "the run stops when the running loss passes this many times its lowest")
        stop_above = float(stop_above)
    _needs("model", model, ("state_dict", "load_state_dict", "parameters"), "a model with state_dict, "
           "load_state_dict and parameters (a torch module)")
    _needs("optimizer", optimizer, ("state_dict", "load_state_dict", "param_groups", "step", "zero_grad"),
           "an optimizer with param_groups, step, zero_grad, state_dict and load_state_dict")
    if loss_of is None:
        if not callable(loss_fn):
            raise complain(OWNER, "loss_fn", loss_fn, "a callable loss_fn(outputs, targets)",
                           "or pass loss_of(model, batch)")
    elif not callable(loss_of):
        raise complain(OWNER, "loss_of", loss_of, "None or a callable loss_of(model, batch)")
    try:
        batches = iter(loader)
    except TypeError:
        raise complain(OWNER, "loader", f"a {type(loader).__name__}", "an iterable of batches") from None

    saved_model = copy.deepcopy(model.state_dict())
    saved_optimizer = copy.deepcopy(optimizer.state_dict())
    params = list(model.parameters())
    saved_grads = [None if p.grad is None else p.grad.detach().clone() for p in params]
    was_training = getattr(model, "training", None)
    logged_rates: list[float] = []
    logged: list[float] = []
    stopped = "budget"
    try:
        if was_training is not None and hasattr(model, "train"):
            model.train()
        mean, best = 0.0, math.inf
        for k, rate in enumerate(rates.tolist()):
            batch = next(batches, _END)
            if batch is _END:
                batches = iter(loader)
                batch = _END if batches is loader else next(batches, _END)
                if batch is _END:
                    stopped = "loader ended"
                    break
            for group in optimizer.param_groups:
                group["lr"] = rate
            optimizer.zero_grad()
            loss = _loss(model, batch, loss_fn, loss_of, k)
            value = float(loss.item()) if hasattr(loss, "item") else float(loss)
            logged_rates.append(rate)
            logged.append(value)
            if not math.isfinite(value):
                stopped = "not finite"
                break
            loss.backward()
            optimizer.step()
            mean = RUNNING_WEIGHT * mean + (1.0 - RUNNING_WEIGHT) * value
            running = mean / (1.0 - RUNNING_WEIGHT ** (k + 1))
            best = min(best, running)
            if stop_above is not None and best > 0.0 and running > stop_above * best:
                stopped = "blew up"
                break
    finally:
        model.load_state_dict(saved_model)
        optimizer.load_state_dict(saved_optimizer)
        for p, g in zip(params, saved_grads):
            p.grad = g
        if was_training is not None and hasattr(model, "train"):
            model.train(was_training)
    out = RangeRun(rates=np.array(logged_rates, dtype=np.float64), losses=np.array(logged, dtype=np.float64),
                   planned=rates, stopped=stopped, stop_above=stop_above)
    for arr in (out.rates, out.losses, out.planned):
        arr.setflags(write=False)
    return out


def _loss(model: Any, batch: Any, loss_fn: Any, loss_of: Any, k: int) -> Any:
    if loss_of is not None:
        loss = loss_of(model, batch)
    else:
        if not (isinstance(batch, (tuple, list)) and len(batch) == 2):
            raise complain(OWNER, f"batch {k}", f"a {type(batch).__name__}", "a pair (inputs, targets)",
                           "for batches of another form pass loss_of=lambda model, batch: ...")
        inputs, targets = batch
        loss = loss_fn(model(inputs), targets)
    if not hasattr(loss, "backward"):
        raise complain(OWNER, f"the loss of batch {k}", f"a {type(loss).__name__}",
                       "a tensor with backward() (a 0-d loss tensor)")
    return loss
