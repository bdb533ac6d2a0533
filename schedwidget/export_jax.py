"""JAX source: a design as a function of the step count that ``jax.jit`` traces and optax calls as a schedule.

The body comes from the scalar body every kind writes (``lowering.lower``) with ``jax.numpy`` as the array
module: branch-free (``jnp.where`` over the pieces), so a traced step count needs no Python ``if``.  The text
imports ``jax.numpy`` only; schedwidget never imports jax.
"""

from __future__ import annotations

from .codegen import TAKEN
from .export_array import checked_lowering, head_lines
from .lowering import JAX
from .schedule import Schedule

__all__ = ["to_jax", "JAX_TAKEN", "FLOAT32_EXACT"]

#: Names the JAX source uses itself besides the scalar writer's.
JAX_TAKEN = TAKEN | {"jnp", "jax", "rate", "step"}
#: Every tick up to this one is exact on a float32 clock (2**24); above it float32 ticks are rounded.
FLOAT32_EXACT = 2 ** 24

PRECISION = [
    "Precision: the clock and the rate take JAX's default float type.  With x64 on",
    "(jax.config.update('jax_enable_x64', True)) it is float64 and the rate equals the design within 1e-12",
    "relative.  Without x64 it is float32: rates within float32 rounding of the design (a few ulps of the",
    "peak; a cosine near a zero floor has float32's absolute error, not its relative one), and ticks above",
    "2**24 = 16,777,216 are not exact: a step count there is rounded to a float32 (to a multiple of 2, then",
    "4, ...), so the rate is the design's at a tick up to a few steps away, and step counts past a budget",
    "of more than 2**24 ticks read the budget's float32 neighbour.  Use x64 for budgets above 2**24.",
    "A negative step count is not refused inside jit (traced values cannot raise): pass counts >= 0.",
    "Without x64, JAX's integers are int32: a step count above 2**31 - 1 cannot be passed at all.",
    "Divisions read x / (u * 0.0 + c): XLA turns x / c into x * (1 / c), which is not the design's rounding.",
]


def to_jax(s: Schedule, name: str = "lr_at", unit: str = "step", steps_per_epoch: int | None = None) -> str:
    """Source of ``name(step)``: the design's rate at a step count, as ``jax.numpy`` code ``jax.jit`` can trace.

    ``step`` may be a Python int, a JAX integer scalar (optax passes its update count) or an integer array
    (one rate per element).  Use it as an optax schedule: ``optax.sgd(learning_rate=lr_at)``, or under
    ``optax.inject_hyperparams`` to see the rate in the optimizer state.  The docstring states the float32 and
    float64 (x64) behaviour.

    Parameters
    ----------
    s : the schedule.
    name : the function's name: a plain ASCII identifier, not a keyword, dunder, builtin or a name the
        code uses itself (``jnp``, ``jax``, ``step``, ``rate``, the helpers ``r1``, ``u2``, ...).
    unit : "step" or "epoch", the unit of the clock (stated in the docstring).
    steps_per_epoch : adds the budget in epochs to the docstring (unit "step").

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> text = to_jax(warmup(cosine(0.1, steps=97_750), steps=5_750))
    >>> text.splitlines()[0], "jnp.where(" in text
    ('import jax.numpy as jnp', True)
    """
    unit, spe, lines, result = checked_lowering("to_jax", s, name, JAX_TAKEN, unit, steps_per_epoch, JAX)
    n = s.length
    doc = head_lines(s, name, unit, spe, "Learning rate at a step count (a traced int scalar or array, >= 0).",
                     f"one tick is one {'optimizer update: optax counts them' if unit == 'step' else 'epoch'}",
                     ["Branch-free jax.numpy code: jax.jit traces it and optax calls it as a schedule.", "",
                      *PRECISION])
    out = ["import jax.numpy as jnp", "", "", f"def {name}(step):", *doc,
           "    u = jnp.asarray(step)",
           "    u = u.astype(jnp.result_type(float))  # float64 with x64 on, else float32"]
    if n is not None:
        out.append(f"    u = jnp.minimum(u, {float(n)!r})  # past the end the rate holds")
    out += ["    " + x for x in lines]
    # XLA divides by a constant as a product with its reciprocal and fuses a * b + c: a rate of exactly 0 can
    # come out an ulp below it, and a rate is never negative
    out.append(f"    return jnp.broadcast_to(jnp.maximum(jnp.asarray({result}, dtype=u.dtype), 0.0), u.shape)")
    return "\n".join(out) + "\n"
