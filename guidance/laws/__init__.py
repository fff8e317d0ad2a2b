"""covey's built-in guidance laws (see guidance.registry for the lookup by name).

- :class:`~guidance.laws.propulsion_only.PropulsionOnly` (``"propulsion_only"``)
- :class:`~guidance.laws.hybrid.HybridSingle` (``"hybrid_single"``)
- :class:`~guidance.laws.resolve.HybridResolve` (``"hybrid_resolve"``)
- :class:`~guidance.laws.example_user_law.DragBangBang` (``"drag_bang_bang"``), the worked example
  of a user's law in DEVELOPERS.md.
"""

from .example_user_law import DragBangBang
from .hybrid import HybridSingle
from .propulsion_only import PropulsionOnly
from .resolve import HybridResolve

__all__ = ["PropulsionOnly", "HybridSingle", "HybridResolve", "DragBangBang"]
