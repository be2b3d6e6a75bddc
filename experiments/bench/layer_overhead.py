"""Cost of the intervention in the message-passing layers, measured in one run.

Forward + backward on
  (a) a random graph with 100,000 nodes and 1,000,000 edges, and
  (b) a batch of 1,024 rows sharing the alarm graph (x of shape [1024, 37, F]),
with a 10% intervened mask ([N] in (a), one [N] row per batch row in (b)), of

  ours_masked   InterventionalConv with the mask
  ours_plain    the same layer without a mask
  wrapper       Interventional(SAGEConv) with the mask, on the full graph
  sage_precut   bare SAGEConv on the pre-cut graph: the output of
                drop_parent_edges, in (b) on the pre-cut disjoint batch of the
                1,024 rows (the cut is made before timing)
  sage_full     bare SAGEConv on the full, uncut graph (in (b) x [1024, 37, F])

Ratios: "ours" = ours_masked / ours_plain; "wrapper/pre-cut" = wrapper /
sage_precut, the honest overhead of the wrapper (same edges, cut inside or
before); "wrapper/full" = wrapper / sage_full (a conv on fewer edges, so it
may be below 1).

Times are taken over interleaved repetitions (--reps for (a), five times as
many for the 30x cheaper (b)), each case in its own fresh child process; the
ratios are printed of the medians and of the minimums (interference from
other jobs only adds time, so the minimum is the steadier estimate). On
a machine shared with other jobs use --threads 1: with two threads and one
core taken by another process, every parallel op waits for the descheduled
thread and the times of (b) grow up to tenfold.

Peak memory is the rise of the peak resident set size (VmHWM, reset through
/proc/self/clear_refs after the inputs are built) during one forward +
backward in a fresh child process, the median over --mem-runs children per
configuration (CPU tensors are not visible to tracemalloc). The children run
with glibc's mmap threshold fixed at 64 KiB (MALLOC_MMAP_THRESHOLD_), so that
freed tensors leave the process and the peak tracks the tensors alive at
once; with glibc's dynamic threshold the peak of the small case (b) moves by
+-20% between identical runs. Linux only.

Goals: ours <= 1.10, wrapper/pre-cut <= 1.25, memory overhead <= 10%.

Run: python experiments/bench/layer_overhead.py [--reps 9] [--channels 32] [--mem-runs 5] [--threads T]
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import os
import statistics
import time

import torch

NAMES = ("ours_masked", "ours_plain", "wrapper", "sage_precut", "sage_full")


def make_case(case: str, channels: int, seed: int = 0):
    """``(x, edge_index, mask)`` of the case and the pre-cut input ``(x_flat, edge_index_cut)`` for bare SAGE."""
    from intervgnn.nn import drop_parent_edges

    g = torch.Generator().manual_seed(seed)
    if case == "random":
        n, e = 100_000, 1_000_000
        edge_index = torch.randint(0, n, (2, e), generator=g)
        x = torch.randn(n, channels, generator=g)
        mask = torch.rand(n, generator=g) < 0.10
        pre_cut = (x, drop_parent_edges(edge_index, mask)[0])
    else:
        import intervgnn as ig

        graph = ig.load_network("alarm").graph
        edge_index = graph.edge_index
        rows, n = 1024, graph.num_nodes
        x = torch.randn(rows, n, channels, generator=g)
        mask = torch.rand(rows, n, generator=g) < 0.10
        offsets = torch.arange(rows).mul_(n).view(1, rows, 1)
        disjoint = (edge_index.unsqueeze(1) + offsets).reshape(2, -1)
        pre_cut = (x.reshape(rows * n, channels), drop_parent_edges(disjoint, mask.reshape(-1))[0])
    return x, edge_index, mask, pre_cut


def make_layers(channels: int):
    from torch_geometric.nn import SAGEConv

    from intervgnn.nn import Interventional, InterventionalConv

    torch.manual_seed(0)
    ours = InterventionalConv(channels, channels)
    sage = SAGEConv(channels, channels)
    return {"ours": ours, "wrapper": Interventional(sage), "sage": sage}


def step(name, layers, x, edge_index, mask, pre_cut):
    xr = (pre_cut[0] if name == "sage_precut" else x).detach().requires_grad_(True)
    if name == "ours_masked":
        out = layers["ours"](xr, edge_index, mask)
    elif name == "ours_plain":
        out = layers["ours"](xr, edge_index)
    elif name == "wrapper":
        out = layers["wrapper"](xr, edge_index, mask)
    elif name == "sage_precut":
        out = layers["sage"](xr, pre_cut[1])
    else:
        out = layers["sage"](xr, edge_index)
    out.square().mean().backward()


def _status_kib(key: str) -> int:
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith(key):
                return int(line.split()[1])
    raise RuntimeError(f"{key} not in /proc/self/status")


def _child(case, channels, name, threads, queue):
    import gc

    if threads:
        torch.set_num_threads(threads)

    inputs = make_case(case, channels)
    layers = make_layers(channels)
    gc.collect()
    with open("/proc/self/clear_refs", "w") as fh:  # reset the peak-RSS mark (Linux)
        fh.write("5")
    base = _status_kib("VmRSS")
    step(name, layers, *inputs)
    queue.put((_status_kib("VmHWM") - base) / 1024.0)  # MiB


def _in_child(target, *args, env=None):
    ctx = mp.get_context("spawn")
    q = ctx.Queue()
    p = ctx.Process(target=target, args=args + (q,))
    saved = dict(os.environ)
    os.environ.update(env or {})
    try:
        p.start()  # the child inherits the environment at start
    finally:
        os.environ.clear()
        os.environ.update(saved)
    value = q.get()
    p.join()
    return value


def peak_memory(case, channels, name, runs, threads):
    """Median rise of peak RSS during one forward + backward, over ``runs`` fresh processes."""
    env = {"MALLOC_MMAP_THRESHOLD_": str(64 * 1024)}
    return statistics.median(_in_child(_child, case, channels, name, threads, env=env) for _ in range(runs))


def _time_child(case, channels, reps, threads, queue):
    if threads:
        torch.set_num_threads(threads)
    queue.put((torch.get_num_threads(), time_case(case, channels, reps if case == "random" else 5 * reps)))


def time_case(case, channels, reps):
    inputs = make_case(case, channels)
    layers = make_layers(channels)
    for name in NAMES:  # warm-up
        step(name, layers, *inputs)
    times = {name: [] for name in NAMES}
    for _ in range(reps):
        for name in NAMES:
            t0 = time.perf_counter()
            step(name, layers, *inputs)
            times[name].append(time.perf_counter() - t0)
    return {name: (statistics.median(ts), min(ts)) for name, ts in times.items()}


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--reps", type=int, default=9)
    ap.add_argument("--channels", type=int, default=32)
    ap.add_argument("--mem-runs", type=int, default=5, help="fresh processes per configuration for peak memory")
    ap.add_argument("--threads", type=int, default=0, help="torch threads in the children (default: torch's)")
    ap.add_argument("--no-memory", action="store_true", help="skip the peak-memory children")
    args = ap.parse_args()
    results = [
        (case, label) + _in_child(_time_child, case, args.channels, args.reps, args.threads)
        for case, label in [("random", "(a) 100k nodes, 1M edges"), ("alarm_rows", "(b) 1024 rows of alarm")]
    ]
    print(
        f"torch {torch.__version__}, {results[0][2]} threads, channels={args.channels}, "
        f"time: {args.reps} (a) / {5 * args.reps} (b) interleaved reps, "
        f"memory: median of {args.mem_runs} fresh processes"
    )
    print("ours = InterventionalConv masked / no mask; wrapper/pre-cut = Interventional(SAGEConv) masked / bare")
    print("SAGEConv on the pre-cut graph (the wrapper's overhead); wrapper/full = same / bare SAGEConv on the full graph")
    print("rows: t med / t min = ratio of median / minimum times; memory = relative rise of peak RSS")
    print(f"{'case':<26} {'':<6} {'ours':>8} {'wrapper/pre-cut':>16} {'wrapper/full':>13}")
    for case, label, _, tt in results:
        for i, what in enumerate(("t med", "t min")):
            t = {name: v[i] for name, v in tt.items()}
            print(
                f"{label if i == 0 else '':<26} {what:<6} {t['ours_masked'] / t['ours_plain']:>8.3f} "
                f"{t['wrapper'] / t['sage_precut']:>16.3f} {t['wrapper'] / t['sage_full']:>13.3f}"
            )
        if not args.no_memory:
            m = {name: peak_memory(case, args.channels, name, args.mem_runs, args.threads) for name in NAMES}
            print(
                f"{'':<26} {'memory':<6} {m['ours_masked'] / m['ours_plain'] - 1:>+8.1%} "
                f"{m['wrapper'] / m['sage_precut'] - 1:>+16.1%} {m['wrapper'] / m['sage_full'] - 1:>+13.1%}"
            )
        print("  median ms: " + ", ".join(f"{k}={v[0] * 1e3:.1f}" for k, v in tt.items()))
        if not args.no_memory:
            print("  peak MiB: " + ", ".join(f"{k}={v:.0f}" for k, v in m.items()))


if __name__ == "__main__":
    main()
