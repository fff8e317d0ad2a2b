"""Orekit's messages in covey's words: the known failures of a run, with the key to change.

:func:`translate` turns an exception raised by the Java side (an ``OrekitException`` reaching
Python, or a :class:`sim.errors.PropagationError` that quotes one) into a
:class:`sim.errors.PropagationError` whose detail says what happened and which scenario key to
change. Unknown messages are left alone (None). Pure Python: it matches message text only, so it
may be imported anywhere.
"""

from __future__ import annotations

import re

from sim.errors import CoveyError, PropagationError

__all__ = ["KNOWN_MESSAGES", "translate"]

KNOWN_MESSAGES: tuple[tuple[re.Pattern, str], ...] = (
    (re.compile(r"hyperbolic orbits cannot be handled", re.I),
     "the orbit became unbound or re-entered within one integration step (drag or radiation "
     "pressure far too strong for the mass): raise the orbit (chief.orbit.altitude_km, "
     "events.min_altitude_km), raise bus.<name>.mass_kg or lower the bus's areas"),
    (re.compile(r"almost equatorial orbit \(i = ([-0-9.eE]+) degrees\)", re.I),
     "the mean inclination reached {0} deg, where the Eckstein-Hechler mean theory is singular "
     "(near-equatorial): keep chief.orbit.i_deg (and each deputy's) at least 0.000573 deg away "
     "from 0 and 180 deg"),
    (re.compile(r"almost critically inclined orbit \(i = ([-0-9.eE]+) degrees\)", re.I),
     "the mean inclination reached {0} deg, where the Eckstein-Hechler mean theory is singular "
     "(critical inclination): keep chief.orbit.i_deg (and each deputy's) outside "
     "[63.3634, 63.5066] and [116.4934, 116.6366] deg"),
    (re.compile(r"too large eccentricity for propagation model", re.I),
     "the mean eccentricity reached 0.1 or more, beyond the Eckstein-Hechler mean theory: "
     "lower chief.orbit.e or the deputies' roe_m eccentricity components"),
    (re.compile(r"no solar activity available at (\S+), data available only in range "
                r"\[(\S+), (\S+)\]", re.I),
     "the solar-activity data end at {2} and the run reached {0}: move run.epoch_utc or "
     "shorten run.duration_days, or give newer data ([environment.solar_activity] or "
     "--orekit-data)"),
    (re.compile(r"(no IERS UTC-TAI history data loaded|no data loaded|"
                r"no Earth Orientation Parameters loaded)", re.I),
     "Orekit found no usable data ({0}): give an Orekit data folder or zip with --orekit-data, "
     "COVEY_OREKIT_DATA or run.orekit_data, or unset them to use the bundled data"),
)
"""Message pattern -> covey's words (``str.format`` with the pattern's groups)."""


def _words(text: str) -> str | None:
    for pattern, words in KNOWN_MESSAGES:
        m = pattern.search(text)
        if m:
            return words.format(*m.groups())
    return None


def translate(exc: BaseException, t_s: float, spacecraft: str) -> CoveyError | None:
    """A known Orekit failure in covey's words, or None.

    Parameters
    ----------
    exc : BaseException
        What the run raised.
    t_s : float
        Time reached, s since the epoch (used when ``exc`` does not say).
    spacecraft : str
        Who was being propagated (used when ``exc`` does not say).
    """
    if isinstance(exc, PropagationError):
        words = _words(exc.detail)
        return None if words is None else PropagationError(exc.t_s, exc.spacecraft, words)
    if isinstance(exc, CoveyError):
        return None
    words = _words(f"{type(exc).__name__}: {exc}")
    return None if words is None else PropagationError(t_s, spacecraft, words)
