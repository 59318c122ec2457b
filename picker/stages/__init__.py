"""Stage types: one module each, registered here by topology name.

A new stage type is one module (a ``StageType`` subclass; see picker.stages.base) and
one ``register`` line below, or a ``register`` call from outside.
"""

from picker.stages import (
    difference,
    follower,
    inverting,
    levelshift,
    mfb_bandpass,
    mfb_lowpass,
    non_inverting,
    transimpedance,
    vcvs_highpass,
    vcvs_lowpass,
)
from picker.stages.base import Stage, StageType, parallel
from picker.stages.registry import kind, kinds, register, stage, unregister

register(inverting.KIND)
register(non_inverting.KIND)
register(follower.KIND)
register(difference.KIND)
register(vcvs_lowpass.KIND)
register(vcvs_highpass.KIND)
register(mfb_lowpass.KIND)
register(mfb_bandpass.KIND)
register(transimpedance.KIND)
register(levelshift.KIND)

__all__ = ["Stage", "StageType", "kind", "kinds", "parallel", "register", "stage",
           "unregister"]
