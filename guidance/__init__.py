"""covey guidance library: pure numpy/scipy, like flight software. Never imports ``sim`` or Java."""

__version__ = "0.1.0"
