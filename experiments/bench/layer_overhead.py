"""Cost of the intervention in the message-passing layers, measured in one run.

Forward + backward on
  (a) a random graph with 100,000 nodes and 1,000,000 edges, and
  (b) a batch of 1,024 rows sharing the alarm graph (x of shape [1024, 37, F]),
for
  - InterventionalConv with a 10% intervened mask / the same layer without a mask,
  - Interventional(SAGEConv) with the mask / bare SAGEConv on the same input.
Times are medians over interleaved repetitions in this process. Peak memory
is the rise of the peak resident set size (VmHWM, reset through
/proc/self/clear_refs after the inputs are built) of a fresh child process
running one forward + backward of each configuration (CPU tensors are not
visible to tracemalloc). Linux only.

Goals: <= 1.10 for our layer, <= 1.25 for the wrapper, memory overhead <= 10%.

Run: python experiments/bench/layer_overhead.py [--reps 7] [--channels 32]
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import statistics
import time

import torch


def make_case(case: str, channels: int, seed: int = 0):
    g = torch.Generator().manual_seed(seed)
    if case == "random":
        n, e = 100_000, 1_000_000
        edge_index = torch.randint(0, n, (2, e), generator=g)
        x = torch.randn(n, channels, generator=g)
        mask = torch.rand(n, generator=g) < 0.10
    else:
        import intervgnn as ig

        graph = ig.load_network("alarm").graph
        edge_index = graph.edge_index
        x = torch.randn(1024, graph.num_nodes, channels, generator=g)
        mask = torch.rand(1024, graph.num_nodes, generator=g) < 0.10
    return x, edge_index, mask


def make_layers(channels: int):
    from torch_geometric.nn import SAGEConv

    from intervgnn.nn import Interventional, InterventionalConv

    torch.manual_seed(0)
    ours = InterventionalConv(channels, channels)
    sage = SAGEConv(channels, channels)
    return {
        "ours_masked": (ours, True),
        "ours_plain": (ours, False),
        "wrapper_masked": (Interventional(sage), True),
        "sage_plain": (sage, False),
    }


def step(layer, x, edge_index, mask, use_mask):
    xr = x.detach().requires_grad_(True)
    out = layer(xr, edge_index, mask) if use_mask else layer(xr, edge_index)
    out.square().mean().backward()


def _status_kib(key: str) -> int:
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith(key):
                return int(line.split()[1])
    raise RuntimeError(f"{key} not in /proc/self/status")


def _child(case, channels, name, queue):
    import gc

    x, edge_index, mask = make_case(case, channels)
    layer, use_mask = make_layers(channels)[name]
    gc.collect()
    with open("/proc/self/clear_refs", "w") as fh:  # reset the peak-RSS mark (Linux)
        fh.write("5")
    base = _status_kib("VmRSS")
    step(layer, x, edge_index, mask, use_mask)
    queue.put((_status_kib("VmHWM") - base) / 1024.0)  # MiB


def peak_memory(case, channels, name):
    """Rise of peak RSS during one forward + backward, in a fresh process."""
    ctx = mp.get_context("spawn")
    q = ctx.Queue()
    p = ctx.Process(target=_child, args=(case, channels, name, q))
    p.start()
    value = q.get()
    p.join()
    return value


def time_case(case, channels, reps):
    x, edge_index, mask = make_case(case, channels)
    layers = make_layers(channels)
    for name, (layer, use_mask) in layers.items():  # warm-up
        step(layer, x, edge_index, mask, use_mask)
    times = {name: [] for name in layers}
    for _ in range(reps):
        for name, (layer, use_mask) in layers.items():
            t0 = time.perf_counter()
            step(layer, x, edge_index, mask, use_mask)
            times[name].append(time.perf_counter() - t0)
    return {name: statistics.median(ts) for name, ts in times.items()}


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--reps", type=int, default=7)
    ap.add_argument("--channels", type=int, default=32)
    ap.add_argument("--no-memory", action="store_true", help="skip the peak-memory children")
    args = ap.parse_args()
    print(f"torch {torch.__version__}, {torch.get_num_threads()} threads, channels={args.channels}, reps={args.reps}")
    print(f"{'case':<28} {'ours masked/plain':>18} {'wrapper/bare SAGE':>18} {'mem ours':>9} {'mem wrapper':>12}")
    for case, label in [("random", "(a) 100k nodes, 1M edges"), ("alarm_rows", "(b) 1024 rows of alarm")]:
        t = time_case(case, args.channels, args.reps)
        r_ours = t["ours_masked"] / t["ours_plain"]
        r_wrap = t["wrapper_masked"] / t["sage_plain"]
        if args.no_memory:
            mem_ours = mem_wrap = "n/a"
        else:
            m = {name: peak_memory(case, args.channels, name) for name in t}
            mem_ours = f"{m['ours_masked'] / m['ours_plain'] - 1:+.1%}"
            mem_wrap = f"{m['wrapper_masked'] / m['sage_plain'] - 1:+.1%}"
        print(f"{label:<28} {r_ours:>18.3f} {r_wrap:>18.3f} {mem_ours:>9} {mem_wrap:>12}")
        print(
            "  ms: " + ", ".join(f"{k}={v * 1e3:.1f}" for k, v in t.items())
            + ("" if args.no_memory else "; peak MiB: " + ", ".join(f"{k}={v:.0f}" for k, v in m.items()))
        )


if __name__ == "__main__":
    main()
