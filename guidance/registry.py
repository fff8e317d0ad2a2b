"""Lookup of guidance laws: built-in names, or a user's law as ``"package.module:ClassName"``."""

from __future__ import annotations

import importlib

from .interface import GuidanceInputError, GuidanceLaw
from .laws import DragBangBang, HybridResolve, HybridSingle, PropulsionOnly

LAWS: dict[str, type] = {
    "propulsion_only": PropulsionOnly,
    "hybrid_single": HybridSingle,
    "hybrid_resolve": HybridResolve,
    "drag_bang_bang": DragBangBang,
}
"""Built-in laws by name."""


def _allowed() -> str:
    return ("a built-in law (" + ", ".join(repr(k) for k in LAWS) + ") or a user's law as "
            "'package.module:ClassName' (importable, constructed with no arguments, with "
            "setup(mission) and step(t_s, nav) methods)")


def load_law(spec: str) -> GuidanceLaw:
    """A new instance of the law named by ``spec``.

    Parameters
    ----------
    spec : str
        A key of :data:`LAWS` or ``"package.module:ClassName"``.

    Raises
    ------
    GuidanceInputError
        Key ``guidance.law``, with the value and the allowed names, when the spec is not a built-in
        name, its module cannot be imported, the class is missing, or the object is not a law.
    """
    if not isinstance(spec, str) or not spec.strip():
        raise GuidanceInputError("guidance.law", spec, _allowed())
    spec = spec.strip()
    if spec in LAWS:
        return LAWS[spec]()
    if ":" not in spec:
        raise GuidanceInputError("guidance.law", spec, "unknown name; " + _allowed())
    mod_name, _, cls_name = spec.partition(":")
    try:
        module = importlib.import_module(mod_name)
    except Exception as exc:  # noqa: BLE001 - any import failure is a bad spec for the user
        raise GuidanceInputError("guidance.law", spec,
                                 f"module {mod_name!r} cannot be imported ({type(exc).__name__}: "
                                 f"{exc}); " + _allowed()) from exc  # COVEY_DEBUG=1 shows its traceback
    cls = getattr(module, cls_name, None)
    if cls is None or not isinstance(cls, type):
        raise GuidanceInputError("guidance.law", spec,
                                 f"module {mod_name!r} has no class {cls_name!r}; " + _allowed())
    try:
        law = cls()
    except Exception as exc:  # noqa: BLE001
        raise GuidanceInputError("guidance.law", spec,
                                 f"{cls_name}() failed ({type(exc).__name__}: {exc}); " + _allowed()) from exc
    if not isinstance(law, GuidanceLaw):
        raise GuidanceInputError("guidance.law", spec,
                                 f"{cls_name} lacks setup(mission) / step(t_s, nav); " + _allowed())
    return law
