"""``make fuzz``: the fuzz of tests/fuzzing.py with many cases, and the counts by outcome.

Runs every target (SigMF metadata, chain specs, command-line options) with fresh random cases, prints
how many ended in a clean error, were accepted, or anything else (a traceback, a hang over 20 s, a
partial file, a written input, noise on stderr), and exits 1 when any case is in the last group.

    .venv/bin/python tests/fuzz.py --cases 10000 [--seed N]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

from hypothesis import HealthCheck, given, settings  # noqa: E402

import fuzzing  # noqa: E402

#: share of the cases per target
SHARES = {"sigmf": 0.25, "spec": 0.25, "cli": 0.35, "wav": 0.15}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=10000, help="cases in all (default 10000)")
    ap.add_argument("--seed", type=int, default=None, help="seed of the draws (default: a fresh one)")
    args = ap.parse_args(argv)
    fuzzing.STRICT = False
    t0 = time.monotonic()
    with tempfile.TemporaryDirectory(prefix="sdrx-fuzz-") as root:
        ws = fuzzing.Workspace(Path(root))
        for target, share in SHARES.items():
            n = max(1, round(args.cases * share))
            kw = dict(max_examples=n, deadline=None, database=None, derandomize=False,
                      suppress_health_check=list(HealthCheck))
            strategy = fuzzing.TARGETS[target]()

            run_target = settings(**kw)(given(case=strategy)(_runner(ws, target)))

            if args.seed is not None:
                from hypothesis import seed as hseed

                run_target = hseed(args.seed)(run_target)
            t1 = time.monotonic()
            run_target()
            done = sum(v for (t, _o), v in fuzzing.OUTCOMES.items() if t == target)
            print(f"{target:6s} {done:6d} cases in {time.monotonic() - t1:7.1f} s", flush=True)
    return report(time.monotonic() - t0)


def _runner(ws, target):
    def run_target(case):
        fuzzing.check(ws, target, case)
    return run_target


def report(elapsed: float) -> int:
    counts = fuzzing.OUTCOMES
    total = sum(counts.values())
    print(f"\n{total} cases in {elapsed:.0f} s")
    print(f"{'target':8s} {'clean error':>12s} {'accepted':>10s} {'anything else':>14s}")
    targets = sorted({t for t, _ in counts})
    for t in targets:
        err = counts[(t, "error")]
        acc = counts[(t, "accepted")]
        other = sum(v for (tt, o), v in counts.items() if tt == t and o not in ("error", "accepted"))
        print(f"{t:8s} {err:12d} {acc:10d} {other:14d}")
    err = sum(counts[(t, "error")] for t in targets)
    acc = sum(counts[(t, "accepted")] for t in targets)
    other = total - err - acc
    print(f"{'all':8s} {err:12d} {acc:10d} {other:14d}")
    kinds = {}
    for target, outcome, detail in fuzzing.BAD:
        kinds.setdefault(outcome, []).append((target, detail))
    for outcome, items in sorted(kinds.items()):
        print(f"\n{outcome}: {len(items)}")
        for target, detail in items[:5]:
            print(f"  [{target}] {detail[:600]}")
    if other:
        print(f"\nFAIL: {other} case(s) broke a promise (traceback, hang over {fuzzing.HANG_S:g} s, partial file, "
              "written input, or noise on stderr)")
        return 1
    print("\nOK: no traceback, no hang over 20 s, no partial file, no written input")
    return 0


if __name__ == "__main__":
    sys.exit(main())
