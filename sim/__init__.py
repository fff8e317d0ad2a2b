"""covey's truth world and harness. Only this package touches Orekit and Java."""

__version__ = "0.1.0"
