"""Signal preparation: sign, hold start, start-up transient, event window, baseline, conversion.

The isothermal entry point is :func:`prepare_isothermal` (Trace -> Conversion).
The pieces are public so that the scan (cooling) preparation can reuse them:
:func:`detect_exotherm` and :func:`orient` for the sign, the baselines (which
work on any monotone axis), and the event finders.
"""

from .baseline import (
    cumulative_trapezoid,
    linear_baseline,
    polynomial_baseline,
    region_mask,
    sigmoidal_baseline,
)
from .crystallinity import (
    DELTA_H100,
    AbsoluteCrystallinity,
    ReferenceEnthalpy,
    absolute_crystallinity,
    reference_enthalpy,
)
from .events import (
    EventWindow,
    HoldStart,
    IsothermalEvents,
    TransientEnd,
    find_event_window,
    find_hold_start,
    find_transient_end,
    locate_isothermal_events,
    robust_noise,
)
from .isothermal import BASELINE_METHODS, prepare_isothermal
from .sign import ExothermChoice, choose_exotherm, detect_exotherm, orient

__all__ = [
    "prepare_isothermal", "BASELINE_METHODS",
    "detect_exotherm", "orient", "choose_exotherm", "ExothermChoice",
    "find_hold_start", "find_transient_end", "find_event_window", "locate_isothermal_events",
    "robust_noise", "HoldStart", "TransientEnd", "EventWindow", "IsothermalEvents",
    "polynomial_baseline", "linear_baseline", "sigmoidal_baseline", "region_mask",
    "cumulative_trapezoid",
    "DELTA_H100", "ReferenceEnthalpy", "AbsoluteCrystallinity", "reference_enthalpy",
    "absolute_crystallinity",
]
