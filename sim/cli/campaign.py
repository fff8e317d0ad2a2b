"""``covey campaign FILE``: fly a campaign (Monte Carlo, sweep, error budget) into a folder."""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from sim.cli.common import DEFAULT_RESULTS, UsageError

HELP = "fly a campaign: Monte Carlo dispersions, a parameter sweep or an error budget"


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        "campaign", help=HELP,
        description="Fly every run of a campaign file into a folder (run logs in DIR/runs, the "
                    "summary in DIR/summary.h5). The same command again resumes: runs with a "
                    "complete log are skipped. Exit code 0 when every run is ok or stopped, 1 "
                    "when a run failed, 2 bad input.")
    p.add_argument("campaign", metavar="FILE", help="campaign TOML file")
    p.add_argument("-o", "--output", metavar="DIR",
                   help="campaign folder (default: results/<campaign name>)")
    p.add_argument("--workers", type=int, metavar="N",
                   help="worker processes (default: the number of CPU cores; 0: fly in this "
                        "process); with --scheduler local, the LocalCluster's workers")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="fly on a Dask distributed cluster: 'local' starts a LocalCluster, "
                        "an address (tcp://host:8786) connects to a running scheduler")
    p.add_argument("--fresh", action="store_true",
                   help="remove the runs of an earlier campaign in the folder and start over")
    p.add_argument("--truth-threads", type=int, default=1, metavar="N",
                   help="truth threads per run (default 1: one core per worker)")
    p.add_argument("--orekit-data", metavar="PATH",
                   help="Orekit data folder or zip for every run")
    p.add_argument("--jvm-options", metavar="TEXT",
                   help="options of the workers' Java virtual machines, e.g. '-Xmx2g "
                        "-XX:+UseSerialGC' (default: COVEY_JVM_OPTIONS when set, else "
                        "'-XX:+UseSerialGC'; '' for the JVM's own defaults)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress lines")
    return p


class CampaignProgress:
    """Runs done, failed, running and an ETA: one updating line on a terminal, a plain line at most
    every ``interval_s`` otherwise (and one per failed run)."""

    def __init__(self, stream=None, interval_s: float = 10.0, width: int = 24):
        self.stream = stream or sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.interval_s, self.width = interval_s, width
        self._last = -1e9
        self._seen_failed = 0
        self.active = False

    @staticmethod
    def _eta(s) -> str:
        if s is None:
            return "ETA --"
        s = int(round(s))
        return f"ETA {s // 3600}h{s % 3600 // 60:02d}m" if s >= 3600 else (
            f"ETA {s // 60}m{s % 60:02d}s" if s >= 60 else f"ETA {s}s")

    def __call__(self, st: dict) -> None:
        total, done = st["total"], st["done"]
        text = (f"{done}/{total} runs done ({st['skipped']} already), {st['failed']} failed, "
                f"{st['running']} running, {self._eta(st.get('eta_s'))}")
        last = st.get("last")
        now = time.perf_counter()
        if self.tty:
            n = int(round(self.width * done / total)) if total else self.width
            self.stream.write(f"\r[{'#' * n}{'.' * (self.width - n)}] {text}   ")
            self.active = True
            if st.get("final"):
                self.stream.write("\n")
                self.active = False
        else:
            new_fail = st["failed"] > self._seen_failed and last and last.get("status") == "failed"
            if new_fail:
                self.stream.write(f"run {last['index']} failed: {last['reason']}\n")
            if st.get("final") or now - self._last >= self.interval_s:
                self.stream.write(text + "\n")
                self._last = now
        self._seen_failed = st["failed"]
        self.stream.flush()

    def done(self) -> None:
        if self.active:
            self.stream.write("\n")
            self.stream.flush()
            self.active = False


def run(args: argparse.Namespace) -> int:
    """Plan (everything checked first), fly, summarise; the exit code."""
    from sim.campaign.execute import run_campaign
    from sim.campaign.plan import plan_campaign
    from sim.campaign.spec import load_campaign

    if args.workers is not None and args.workers < 0:
        raise UsageError(f"--workers {args.workers}: give 0 (this process) or more worker processes")
    if args.workers == 0 and args.scheduler:
        raise UsageError("--workers 0 flies in this process; it cannot be combined with --scheduler")
    if args.truth_threads < 1:
        raise UsageError(f"--truth-threads {args.truth_threads}: give 1 or more")
    c = load_campaign(args.campaign)
    plan = plan_campaign(c, orekit_data=args.orekit_data)
    folder = Path(args.output) if args.output else DEFAULT_RESULTS / c.name
    bar = None if args.quiet else CampaignProgress()
    shown = []

    def progress(st):
        if not shown:
            shown.append(1)
            for n in st.get("notes", ()):
                sys.stderr.write(f"{n}\n")
            where = f" on {st['executor']}" if st.get("executor") else ""
            print(f"campaign {c.name}: {c.kind}, {plan.n_runs} runs ({st['skipped']} complete "
                  f"already){where} -> {folder}", flush=True)
        if bar is not None:
            bar(st)

    try:
        res = run_campaign(plan, folder, workers=args.workers, scheduler=args.scheduler,
                           fresh=args.fresh, truth_threads=args.truth_threads,
                           orekit_data=args.orekit_data, progress=progress,
                           jvm_options=args.jvm_options)
    finally:
        if bar is not None:
            bar.done()
    counts = ", ".join(f"{res.counts.get(s, 0)} {s}" for s in ("ok", "stopped", "failed", "missing")
                       if res.counts.get(s, 0) or s in ("ok", "failed"))
    print(f"{'done' if res.exit_code == 0 else 'done with failures'}: {res.n_runs} runs ({counts}); "
          f"{res.flown} flown now in {res.wall_s:.1f} s -> {res.summary}")
    for index, reason, log in res.failed:
        print(f"  run {index} failed: {reason}" + (f" ({log})" if log else ""))
    if res.replaced_workers:
        print(f"  {res.replaced_workers} worker process(es) died and were replaced")
    print(f"  covey summary {folder}")
    return res.exit_code
