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
