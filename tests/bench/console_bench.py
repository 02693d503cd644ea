"""Console start-up and memory, measured in child processes (imported by tests/bench/run.py).

Each child starts from a fresh interpreter, so the figures include Python's own start-up and
every import, as an operator's `burndesk` does.  The child runs the app headless and reports:

* FRAME: the app's first full frame is on its (virtual) screen (the auto-pilot starts then);
* READY: the first replan (the demo's J2 queue) has arrived, with the process's resident set.

The parent measures wall time from spawning the child to each line.  The baseline is an empty
Textual app (one static label) measured the same way in the same run.
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

# the resident set size of the child, read the same way in both children
RSS_MB = textwrap.dedent('''
    def rss_mb():
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) / 1024.0
        return float("nan")
''')

CHILD_BURNDESK = RSS_MB + textwrap.dedent('''
    import sys, time
    from console.app import BurndeskApp
    from console.session_ops import Session

    session = Session.open(sys.argv[1])
    app = BurndeskApp(session)

    async def pilot(p):
        print("FRAME", flush=True)
        for _ in range(600):
            if app.current_view is not None:
                break
            await p.pause(0.05)
        print("READY", rss_mb(), flush=True)
        app.exit()

    app.run(headless=True, size=(120, 36), auto_pilot=pilot)
    session.close()
''')

CHILD_EMPTY = RSS_MB + textwrap.dedent('''
    from textual.app import App
    from textual.widgets import Static

    class Empty(App):
        def compose(self):
            yield Static("empty")

    app = Empty()

    async def pilot(p):
        print("FRAME", flush=True)
        print("READY", rss_mb(), flush=True)
        app.exit()

    app.run(headless=True, size=(120, 36), auto_pilot=pilot)
''')


def _run_child(code: str, *args) -> tuple[float, float, float]:
    """(seconds to FRAME, seconds to READY, RSS MB at READY) of one child process."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-c", code, *map(str, args)], stdout=subprocess.PIPE,
                            stderr=subprocess.DEVNULL, text=True, cwd=ROOT)
    frame = ready = rss = float("nan")
    for line in proc.stdout:
        now = time.perf_counter() - t0
        if line.startswith("FRAME"):
            frame = now
        elif line.startswith("READY"):
            ready = now
            rss = float(line.split()[1])
    proc.wait(timeout=120)
    return frame, ready, rss


def bench_console(quick: bool) -> dict:
    from console.scenario_file import load_scenario
    from console.session_ops import Session

    n = 3 if quick else 5
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.burn"
        Session.create(path, load_scenario(ROOT / "profiles" / "scenarios" / "demo.toml")).close()
        ours = [_run_child(CHILD_BURNDESK, path) for _ in range(n)]
        base = [_run_child(CHILD_EMPTY) for _ in range(n)]
    med = lambda xs: statistics.median(xs)  # noqa: E731
    return {
        "console_first_frame_s": med([o[0] for o in ours]),
        "console_first_queue_s": med([o[1] for o in ours]),
        "console_rss_mb": med([o[2] for o in ours]),
        "console_baseline_first_frame_s": med([b[0] for b in base]),
        "console_baseline_rss_mb": med([b[2] for b in base]),
    }


if __name__ == "__main__":  # pragma: no cover
    print(bench_console("--quick" in sys.argv))
    os._exit(0)
