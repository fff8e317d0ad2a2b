"""JVM options: how covey reads them (argument, COVEY_JVM_OPTIONS), how a bad option is refused
before any worker starts (``java <options> -version``, the JVM's own check), and what local
campaign workers run with (one thread per numerical library). Common practice, no source.
"""

from __future__ import annotations

import os
import shutil

import pytest

from sim.campaign.executors import LocalExecutor
from sim.campaign.worker import WORKER_JVM_OPTIONS, WORKER_THREAD_ENV
from sim.errors import EnvironmentSetupError
from sim.orekit.boot import JVM_OPTIONS_ENV, check_jvm_options, jvm_options_from


def test_options_from_argument_and_environment(monkeypatch):
    monkeypatch.delenv(JVM_OPTIONS_ENV, raising=False)
    assert jvm_options_from(None) == []
    assert jvm_options_from("-Xmx2g  -XX:+UseSerialGC") == ["-Xmx2g", "-XX:+UseSerialGC"]
    assert jvm_options_from(("-Xss1m",)) == ["-Xss1m"]
    assert jvm_options_from("'-Xlog:gc*,safepoint:file=a b.txt'") == ["-Xlog:gc*,safepoint:file=a b.txt"]
    monkeypatch.setenv(JVM_OPTIONS_ENV, "-Xmx1g")
    assert jvm_options_from(None) == ["-Xmx1g"]
    assert jvm_options_from("") == []  # an explicit empty text: the JVM's defaults


@pytest.mark.parametrize("text, named", [("Xmx1g", "'Xmx1g' is no JVM option"),
                                         ("-Xmx1g 'unclosed", "cannot be split")])
def test_malformed_options_are_refused_with_the_key(text, named):
    with pytest.raises(EnvironmentSetupError) as e:
        jvm_options_from(text)
    assert named in str(e.value) and "-XX:+UseSerialGC -Xmx2g" in str(e.value)


@pytest.mark.skipif(shutil.which("java") is None and not os.environ.get("JAVA_HOME"),
                    reason="no java executable")
def test_the_jvm_itself_refuses_an_unknown_option():
    check_jvm_options(WORKER_JVM_OPTIONS)  # accepted
    check_jvm_options("-Xmx256m -Xss2m")
    with pytest.raises(EnvironmentSetupError) as e:
        check_jvm_options("-Xmx256m -XX:+NoSuchCoveyOption")
    assert "NoSuchCoveyOption" in str(e.value) and "--jvm-options" in str(e.value)


def read_env(keys):
    """Runs in a worker process."""
    return {k: os.environ.get(k) for k in keys}


def test_local_workers_run_numerical_libraries_on_one_thread(monkeypatch):
    for k in WORKER_THREAD_ENV:
        monkeypatch.delenv(k, raising=False)
    monkeypatch.setenv("MKL_NUM_THREADS", "3")  # the user's own choice is kept
    ex = LocalExecutor(1)
    try:
        f = ex.submit(read_env, list(WORKER_THREAD_ENV))
        got, why = ex.outcome(ex.wait([f], timeout=120)[0])
    finally:
        ex.close()
    assert why is None
    assert got == dict(WORKER_THREAD_ENV, MKL_NUM_THREADS="3")


# --- Java 24+: JPype's native library without the JVM's warning (JEP 472, "Prepare to Restrict
# the Use of JNI", OpenJDK 2024: a JNI library loaded by code without native access prints a
# warning on every start unless --enable-native-access names its module).

def _fake_jdk(tmp_path, release_text):
    lib = tmp_path / "jdk" / "lib" / "server"
    lib.mkdir(parents=True)
    (lib / "libjvm.so").write_bytes(b"")
    if release_text is not None:
        (tmp_path / "jdk" / "release").write_text(release_text)
    return str(lib / "libjvm.so")


@pytest.mark.parametrize("release, major", [
    ('IMPLEMENTOR="Eclipse Adoptium"\nJAVA_VERSION="25.0.3"\n', 25),
    ('JAVA_VERSION="17.0.15"\nOS_NAME="Linux"\n', 17),
    ('JAVA_VERSION="1.8.0_402"\n', 8),  # the old numbering: 1.8 is Java 8
    ('JAVA_VERSION="11"\n', 11),
    ('JAVA_VERSION="unknown"\n', None),
    ('OS_NAME="Linux"\n', None),
    (None, None),
])
def test_java_major_is_read_from_the_release_file(tmp_path, release, major):
    from sim.orekit.boot import java_major_of

    assert java_major_of(_fake_jdk(tmp_path, release)) == major


def test_native_access_is_added_from_java_24_only_when_not_given():
    from sim.orekit.boot import NATIVE_ACCESS_OPTION, with_native_access

    assert with_native_access(["-Xmx1g"], 17) == ["-Xmx1g"]
    assert with_native_access(["-Xmx1g"], None) == ["-Xmx1g"]
    assert with_native_access(["-Xmx1g"], 24) == ["-Xmx1g", NATIVE_ACCESS_OPTION]
    assert with_native_access([], 25) == [NATIVE_ACCESS_OPTION]
    own = ["--enable-native-access=org.example"]
    assert with_native_access(own, 25) == own  # the user's own choice is kept


def test_release_file_agrees_with_the_running_jvm():
    import jpype

    from sim.orekit.boot import boot, java_major_of

    boot()
    assert java_major_of(jpype.getDefaultJVMPath()) == int(jpype.getJVMVersion()[0])


def _newer_jdks():
    import glob as _glob

    from sim.orekit.boot import NATIVE_ACCESS_FROM_MAJOR, java_major_of

    for lib in sorted(_glob.glob("/usr/lib/jvm/*/lib/server/libjvm.so")):
        if (java_major_of(lib) or 0) >= NATIVE_ACCESS_FROM_MAJOR:
            return os.path.dirname(os.path.dirname(os.path.dirname(lib)))
    return None


@pytest.mark.skipif(_newer_jdks() is None, reason="no Java 24+ under /usr/lib/jvm")
def test_a_java_24_jvm_boots_without_the_native_access_warning():
    import subprocess
    import sys

    env = dict(os.environ, JAVA_HOME=_newer_jdks())
    env.pop(JVM_OPTIONS_ENV, None)
    code = ("from sim.orekit.boot import boot; b = boot(); "
            "print(b.java_version); print(' '.join(b.jvm_options))")
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env,
                       timeout=180, cwd=os.path.dirname(os.path.dirname(os.path.dirname(__file__))))
    assert p.returncode == 0, p.stderr
    version, options = p.stdout.strip().splitlines()[-2:]
    assert int(version.split(".")[0]) >= 24
    assert "--enable-native-access=ALL-UNNAMED" in options
    assert "restricted method" not in p.stderr, p.stderr
