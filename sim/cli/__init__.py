"""The ``covey`` command: :mod:`main` (the command table and exit codes), one module per command,
:mod:`common` (what they share). No Java at import time.

May import: anything in sim (lazily, inside the commands).
"""
