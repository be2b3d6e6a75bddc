"""Fuzz the readers with many damaged inputs and count what comes out.

For each reader (BIF text, graph file, CSV rows read against a graph,
experiment config) draw ``--inputs`` damaged documents (the strategy of
tests/fuzz_inputs.py: a valid document with a few edits by tokens that tend
to break readers, or arbitrary text) and run the reader on each. Printed per
reader: inputs accepted, refused with the package's own error, foreign
exceptions (any other exception type: a defect), inputs that took over
``--slow`` seconds, and the slowest input's time; then the first few foreign
exceptions and slow inputs, if any. Exit status 1 if any foreign exception
or slow input was seen.

Run: python experiments/bench/fuzz_readers.py [--inputs 10000] [--readers bif graph csv config] [--seed 0]
"""

from __future__ import annotations

import argparse
import collections
import os
import sys
import time
import traceback

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))

from hypothesis import HealthCheck, given, settings  # noqa: E402

from tests.fuzz_inputs import SEEDS, damaged, scratch, timed  # noqa: E402


def fuzz(reader: str, inputs: int, seed: int, slow: float):
    counts = collections.Counter()
    foreign, slow_inputs, worst = [], [], 0.0
    with scratch() as folder:
        timed(reader, SEEDS[reader], folder)  # warm-up: the first read imports what the reader needs

        @settings(max_examples=inputs, deadline=None, database=None, derandomize=False,
                  suppress_health_check=list(HealthCheck))
        @given(damaged(reader))
        def one(text):
            nonlocal worst
            try:
                outcome, seconds = timed(reader, text, folder)
            except Exception as exc:  # noqa: BLE001 - counting what escapes is the point
                counts["foreign"] += 1
                if len(foreign) < 5:
                    foreign.append((text[:300], "".join(traceback.format_exception_only(type(exc), exc)).strip()[:300]))
                return
            counts[outcome] += 1
            worst = max(worst, seconds)
            if seconds > slow:
                counts["slow"] += 1
                slow_inputs.append((text[:200], seconds))

        # hypothesis takes its randomness from its own seed
        from hypothesis import seed as hyp_seed

        hyp_seed(seed)(one)()
    return counts, foreign, slow_inputs, worst


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--inputs", type=int, default=10_000)
    ap.add_argument("--readers", nargs="+", default=sorted(SEEDS), choices=sorted(SEEDS))
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--slow", type=float, default=5.0, help="seconds above which an input counts as slow")
    args = ap.parse_args()
    print(f"{'reader':<8} {'inputs':>7} {'accepted':>9} {'refused':>8} {'foreign':>8} {'slow':>5} {'slowest s':>10} {'wall s':>7}")
    bad = False
    details = []
    for reader in args.readers:
        t0 = time.perf_counter()
        counts, foreign, slow_inputs, worst = fuzz(reader, args.inputs, args.seed, args.slow)
        total = counts["accepted"] + counts["refused"] + counts["foreign"]
        print(f"{reader:<8} {total:>7} {counts['accepted']:>9} {counts['refused']:>8} {counts['foreign']:>8} "
              f"{counts['slow']:>5} {worst:>10.3f} {time.perf_counter() - t0:>7.1f}", flush=True)
        bad |= bool(counts["foreign"] or counts["slow"])
        details += [(reader, "foreign", text, why) for text, why in foreign]
        details += [(reader, "slow", text, f"{s:.1f} s") for text, s in slow_inputs[:5]]
    for reader, kind, text, why in details:
        print(f"\n{reader} {kind}: {why}\n  input: {text!r}")
    sys.exit(1 if bad else 0)


if __name__ == "__main__":
    main()
