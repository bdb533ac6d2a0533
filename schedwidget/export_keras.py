"""Keras source: a design as a Keras 3 ``LearningRateSchedule`` subclass that saves and reloads with a model.

The body comes from the scalar body every kind writes (``lowering.lower``) with ``keras.ops`` as the array
module (branch-free: ``ops.where`` over the pieces), so it runs on any Keras backend that has those ops.  The
class is registered as serializable (package ``schedwidget``): ``model.save()`` stores its name and config, and
``keras.models.load_model()`` rebuilds it once the generated code has run.  schedwidget never imports keras.
"""

from __future__ import annotations

from .codegen import TAKEN
from .export_array import checked_lowering, head_lines
from .lowering import KERAS
from .schedule import Schedule

__all__ = ["to_keras", "KERAS_TAKEN"]

#: Names the Keras source uses itself besides the scalar writer's.
KERAS_TAKEN = TAKEN | {"keras", "ops", "rate", "step", "self", "LearningRateSchedule"}


def to_keras(s: Schedule, name: str = "ExportedSchedule", unit: str = "step",
             steps_per_epoch: int | None = None) -> str:
    """Source of a class ``name``: a Keras 3 ``LearningRateSchedule`` whose ``__call__(step)`` is the design.

    The rate is float32 (Keras' learning-rate type): within float32 rounding of the design, and ticks above
    2**24 are rounded on a float32 clock.  ``get_config()`` is empty (the design is the code itself), so
    ``from_config`` rebuilds it; the class is registered with ``keras.saving.register_keras_serializable``,
    so a model compiled with ``optimizer=keras.optimizers.SGD(learning_rate=name())`` saves with
    ``model.save(...)`` and reloads with ``keras.models.load_model(...)`` in a process that ran the code.

    Parameters
    ----------
    s : the schedule.
    name : the class name: a plain ASCII identifier, not a keyword, dunder, builtin or a name the code uses
        itself (``keras``, ``ops``, ``step``, ``self``, ``rate``, the helpers ``r1``, ``u2``, ...).
    unit : "step" or "epoch", the unit of the clock (Keras counts optimizer updates: "step").
    steps_per_epoch : adds the budget in epochs to the docstring (unit "step").

    Examples
    --------
    >>> from schedwidget import cosine, warmup
    >>> text = to_keras(warmup(cosine(0.1, steps=97_750), steps=5_750))
    >>> "class ExportedSchedule(keras.optimizers.schedules.LearningRateSchedule):" in text
    True
    """
    unit, spe, lines, result = checked_lowering("to_keras", s, name, KERAS_TAKEN, unit, steps_per_epoch, KERAS)
    n = s.length
    doc = head_lines(s, name, unit, spe, "Learning rate at a step count (Keras passes optimizer.iterations).",
                     f"one tick is one {'optimizer update' if unit == 'step' else 'epoch'}",
                     ["Branch-free keras.ops code; float32 rates (Keras' learning-rate type): within float32",
                      "rounding of the design, and step counts above 2**24 = 16,777,216 are rounded to a float32.",
                      "Divisions read x / (u * 0.0 + c): XLA turns x / c into x * (1 / c), which is not the",
                      "design's rounding."])
    out = ["import keras", "from keras import ops", "", "",
           '@keras.saving.register_keras_serializable(package="schedwidget")',
           f"class {name}(keras.optimizers.schedules.LearningRateSchedule):", *doc, "",
           "    def __call__(self, step):",
           '        u = ops.cast(step, "float32")']
    if n is not None:
        out.append(f"        u = ops.minimum(u, {float(n)!r})  # past the end the rate holds")
    out += ["        " + x for x in lines]
    out += [f'        return ops.broadcast_to(ops.maximum(ops.cast({result}, "float32"), 0.0), ops.shape(u))', "",
            "    def get_config(self):",
            "        return {}  # the design is written into the code itself: nothing else to save",
            ""]
    return "\n".join(out)
