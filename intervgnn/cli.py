"""The ``intervgnn`` command."""

from __future__ import annotations

import argparse
import dataclasses
import json
import os
import sys
from collections.abc import Sequence

import numpy as np

from .bn import list_networks, load_network, network_info
from .errors import ConfigError, IntervgnnError
from .query import check_seed
from .texts import CAUTION

__all__ = ["main", "CAUTION", "EXIT_NOT_IDENTIFIABLE"]

#: exit status of ``identify`` and ``estimate`` for a query that is not identifiable on the diagram
#: (0: answered or identifiable; 2: an error in the input)
EXIT_NOT_IDENTIFIABLE = 3


def _assignments(items: Sequence[str] | None, flag: str) -> dict[str, str]:
    out: dict[str, str] = {}
    for item in items or []:
        if "=" not in item:
            raise IntervgnnError(f"{flag} expects VARIABLE=STATE, got '{item}'")
        k, v = item.split("=", 1)
        k, v = k.strip(), v.strip()
        if not k or not v:
            raise IntervgnnError(f"{flag} expects VARIABLE=STATE, got '{item}'")
        if k in out:
            raise IntervgnnError(f"{flag} gives '{k}' twice")
        out[k] = v
    return out


def _print_dist(dist, as_json: bool, extra: dict | None = None) -> None:
    if as_json:
        payload = dist.to_dict()
        payload.update(extra or {})
        payload["caution"] = CAUTION
        print(json.dumps(payload, indent=2))
    else:
        print(dist)


def cmd_networks(args) -> int:
    for name in list_networks():
        info = network_info(name)
        net = load_network(name)
        print(f"{name:<11} {len(net.variables):>3} variables  {net.graph.num_edges:>3} edges  {info.domain}")
        if args.cite:
            print(f"            {info.citation}")
    print()
    print("Random networks, drawn from a seed, for accuracy on networks nobody tuned for:")
    print("  random:nodes=N,seed=S[,parents=3,states=2-5,concentration=1,deterministic=0.1]")
    print("  (e.g. intervgnn exact --network random:nodes=30,seed=4 --target V07)")
    return 0


def cmd_exact(args) -> int:
    net = load_network(args.network)
    do = _assignments(args.do, "--do")
    given = _assignments(args.given, "--given")
    targets = args.target
    if args.each:
        answers = net.query_each(targets, args.each, do=do, given=given)
        if args.json:
            print(json.dumps({"answers": {k: d.to_dict() for k, d in answers.items()}, "caution": CAUTION}, indent=2))
        else:
            for d in answers.values():
                print(d)
                print()
            print(CAUTION)
        return 0
    dist = net.query(targets, do=do, given=given)
    _print_dist(dist, args.json, {"network": net.name, "exact": True})
    if not args.json:
        print()
        print(CAUTION)
    return 0


def cmd_sample(args) -> int:
    check_seed(args.seed, name="--seed")
    net = load_network(args.network)
    table = net.sample(args.rows, do=_assignments(args.do, "--do"), seed=args.seed)
    table.to_csv(args.out)
    print(f"wrote {table.n_rows} rows of {len(table.variables)} variables to {args.out}")
    return 0


def _rows_and_graph(args):
    """Rows and diagram from --network (sampled) or --data/--graph."""
    from .userdata import load_graph, read_csv

    check_seed(args.seed, name="--seed")
    if args.network:
        net = load_network(args.network)
        return net.sample(args.rows, seed=args.seed), net.graph, net
    if not (args.data and args.graph):
        raise IntervgnnError("give --network NAME, or both --data F.csv and --graph G.yaml")
    spec = load_graph(args.graph)
    return read_csv(args.data, spec), spec.graph, None


def _neural_settings(args) -> dict:
    out = {"seed": args.seed, "progress": not getattr(args, "quiet", False)}
    if getattr(args, "steps", None) is not None:
        out["steps"] = args.steps
    if getattr(args, "threads", None) is not None:
        out["threads"] = args.threads
    return out


def _fit_summary(est, table) -> str:
    """One line on what fitting the neural estimator did."""
    results = est.train_results_
    seconds = sum(r.seconds for r in results.values())
    shares = list(est.neural_share_.values())
    share = f"; mean weight of the neural prior against the counts {np.mean(shares):.2f}" if shares else ""
    experimental = int(table.intervened.any(axis=1).sum())
    return (
        f"trained {len(results)} models in {seconds:.1f} s on {est.cells_.num_cells} distinct family configurations "
        f"of {table.n_rows} rows ({experimental} experimental){share}; answers in {est.answer_mode_.replace('_', ' ')} mode"
    )


def cmd_fit(args) -> int:
    from .estimators import NeuralEstimator

    _check_folder_writable(args.out, "--out")  # before the training, not after it
    table, graph, _ = _rows_and_graph(args)
    est = NeuralEstimator(**_neural_settings(args)).fit(table, graph)
    est.save(args.out)
    print(_fit_summary(est, table))
    print(f"saved to {args.out}")
    return 0


def cmd_estimate(args) -> int:
    from .estimators import NeuralEstimator, PluginEstimator
    from .userdata import load_graph, read_csv

    check_seed(args.seed, name="--seed")
    do = _assignments(args.do, "--do")
    given = _assignments(args.given, "--given")
    if args.csv:
        _check_writable(args.csv, "--csv")
    truth = None
    if args.model:
        graph = load_graph(args.graph).graph if args.graph else None
        table = read_csv(args.data, args.graph) if (args.data and args.graph) else None
        est = NeuralEstimator.load(args.model, graph=graph, table=table)
        label = f"neural model {args.model}"
    else:
        table, graph, net = _rows_and_graph(args)
        if args.estimator == "plugin":
            est = PluginEstimator().fit(table, graph)
        elif args.estimator == "estimand":
            from .estimators.estimand import EstimandEstimator

            est = EstimandEstimator().fit(table, graph)
        else:
            est = NeuralEstimator(**_neural_settings(args)).fit(table, graph)
        label = f"{args.estimator} estimator fitted on {table.n_rows} rows"
        if net is not None:
            truth = net.query(args.target, do=do, given=given)
    from .errors import NotIdentified

    if args.effect:
        return _print_effect(est, args, given, label)
    try:
        dist = _answer_with_interval(est, args, do, given)
    except NotIdentified as exc:
        can_answer = "unidentified" in est.get_params()  # only the neural estimator models the hidden causes
        if not args.allow_unidentified or not can_answer:
            if args.json:
                print(json.dumps({
                    "query": exc.identification.query_text(), "identifiable": False, "estimate": None,
                    "message": exc.identification.describe(), "estimator": label, "caution": CAUTION,
                }, indent=2))
                return EXIT_NOT_IDENTIFIABLE
            print(exc.identification.describe())
            print()
            n = est.experimental_rows(do, given) if do else 0
            if n:
                have = f" and have {', '.join(f'{v}={s}' for v, s in given.items())}" if given else ""
                print(f"{n} experimental rows set exactly {', '.join(f'{v}={s}' for v, s in do.items())}{have}: "
                      "--interval answers from them alone.")
                print()
            if can_answer:
                print("No estimate is given for a query that is not identifiable. Pass --allow-unidentified to see the")
                print("neural model's number anyway; it will be marked NOT IDENTIFIED.")
            else:
                print(f"No estimate is given for a query that is not identifiable. The {args.estimator} estimator")
                print("has no model of the hidden causes; --estimator neural --allow-unidentified gives the neural")
                print("model's number, marked NOT IDENTIFIED.")
            print()
            print(CAUTION)
            return EXIT_NOT_IDENTIFIABLE
        est.set_params(unidentified="answer")
        dist = est.query(args.target, do=do, given=given)  # no interval: nothing in the data pins this number down
        print(exc.identification.describe())
        print()
        if args.interval is not None:
            print("No interval is given: the query is not identifiable, so no amount of these rows narrows it down;")
            print("the number below rests on the neural model's assumptions alone.")
            print()
    if args.csv:
        dist.to_csv(args.csv)
    if args.json:
        payload = {"estimate": dist.to_dict(), "estimator": label, "caution": CAUTION}
        if truth is not None:
            payload["exact"] = truth.to_dict()
        print(json.dumps(payload, indent=2))
        return 0
    print(f"Estimate from the {label}:")
    print(dist)
    if truth is not None:
        print()
        print(f"Exact answer from the network '{args.network}' (known here because the rows were sampled from it):")
        print(truth)
    print()
    print(CAUTION)
    return 0


def _check_writable(path: str, option: str) -> None:
    """Refuse, before any fitting, an output file whose folder is missing or not writable."""
    folder = os.path.dirname(os.path.abspath(path))
    if os.path.isdir(path):
        raise IntervgnnError(f"{option}: '{path}' is a folder; give a file name")
    if not os.path.isdir(folder):
        raise IntervgnnError(f"{option}: cannot write '{path}': the folder '{folder}' does not exist")
    if not os.access(folder, os.W_OK):
        raise IntervgnnError(f"{option}: cannot write '{path}': the folder '{folder}' is not writable")


def _check_folder_writable(path: str, option: str) -> None:
    """Refuse, before any fitting, an output folder that is a file, lies under one, or cannot be created."""
    if os.path.exists(path) and not os.path.isdir(path):
        raise IntervgnnError(f"{option}: '{path}' is a file; give a folder")
    folder = os.path.abspath(path)
    while not os.path.isdir(folder):
        if os.path.exists(folder):
            raise IntervgnnError(f"{option}: cannot create '{path}': '{folder}' is a file")
        folder = os.path.dirname(folder)
    if not os.access(folder, os.W_OK):
        raise IntervgnnError(f"{option}: cannot write '{path}': the folder '{folder}' is not writable")


def _answer_with_interval(est, args, do, given):
    if args.interval is None:
        return est.query(args.target, do=do, given=given)
    return est.query_interval(args.target, do=do, given=given, level=args.interval, draws=args.draws, seed=args.seed)


def _print_effect(est, args, given, label) -> int:
    """``--effect X=a,b --state s``: the contrast with its interval and the decision view."""
    treatment, eq, pair = args.effect.partition("=")
    states = [s.strip() for s in pair.split(",")]
    if not eq or len(states) != 2 or not all(states) or not treatment.strip():
        raise IntervgnnError(f"--effect expects TREATMENT=A,B, got '{args.effect}'")
    if len(args.target) != 1 or not args.state:
        raise IntervgnnError("--effect needs one --target and the target's --state whose probability is compared")
    if args.do:
        raise IntervgnnError("--effect sets the treatment itself; leave --do out")
    level = 0.95 if args.interval is None else args.interval
    effect = est.effect_interval(args.target[0], treatment.strip(), states[0], states[1], args.state, given=given,
                                 level=level, draws=args.draws, seed=args.seed)
    if args.csv:
        effect.to_csv(args.csv)
    if args.json:
        print(json.dumps({"effect": effect.to_dict(), "estimator": label, "caution": CAUTION}, indent=2))
        return 0
    print(f"Effect from the {label}:")
    print(effect)
    print()
    print(CAUTION)
    return 0


def cmd_run(args) -> int:
    """Run a sweep; Ctrl-C stops it with one line and exit code 130, the finished runs kept."""
    try:
        return _run_sweep(args)
    except KeyboardInterrupt as exc:
        if hasattr(exc, "finished"):  # RunsInterrupted (harness.executors): it counts the runs kept
            print(f"intervgnn: {exc}", file=sys.stderr)
        else:  # before the runs started, or while the summaries were written
            print("intervgnn: interrupted; any finished runs are kept (run the same command with --resume to go on)",
                  file=sys.stderr)
    return 130  # 128 + SIGINT, the exit status of a program stopped by Ctrl-C (common practice, no source)


def _run_sweep(args) -> int:
    from .harness import load_config, load_records, run_grid, summarise, write_outputs
    from .harness.summary import markdown_tables

    cfg = load_config(args.config)
    if args.output:
        cfg = dataclasses.replace(cfg, output=args.output)
    from .harness.relational import RelationalConfig

    if isinstance(cfg, RelationalConfig):
        return _run_relational(cfg, args)
    if args.rows:
        extra = [r for r in args.rows if r not in cfg.rows]
        if extra:
            raise ConfigError(
                f"--rows {extra[0]} is not a row count of this config; its row counts are: "
                + ", ".join(str(r) for r in cfg.rows)
            )
        cfg = dataclasses.replace(cfg, rows=tuple(r for r in cfg.rows if r in args.rows))
    specs = run_grid(
        cfg, workers=args.workers, executor=args.executor, address=args.address, resume=args.resume,
        progress=not args.quiet, log=print,
    )
    records = load_records(cfg, specs)
    query_rows, summary = summarise(cfg, records)
    paths = write_outputs(cfg, records, (query_rows, summary))
    metric = "tv" if "tv" in cfg.metrics else cfg.metrics[0]
    print()
    print(markdown_tables(cfg, summary, metric))
    for label, path in paths.items():
        print(f"{label:<12} {path}")
    print()
    print(CAUTION)
    return 0


def _run_relational(cfg, args) -> int:
    from .harness.relational import markdown_relational, run_relational, summarise_relational, write_relational

    if args.rows or (args.executor and args.executor != "local"):
        raise ConfigError("a relational sweep has no --rows and runs on the local executor only")
    records = run_relational(cfg, workers=args.workers, resume=args.resume, log=(lambda *a: None) if args.quiet else print)
    rows = summarise_relational(cfg, records)
    paths = write_relational(cfg, rows)
    print()
    print(markdown_relational(cfg, rows))
    for label, path in paths.items():
        print(f"{label:<12} {path}")
    print()
    print(CAUTION)
    return 0


# ---------------------------------------------------------------- relational data


def _relational_data(args, schema):
    """The relational data of ``--data`` (a folder of CSV files) or ``--sqlite`` (a database file)."""
    from .relational import RelationalData

    if bool(args.data) == bool(args.sqlite):
        raise IntervgnnError("give the data as --data FOLDER (CSV files) or --sqlite FILE, one of them")
    if args.data:
        return RelationalData.from_csv_folder(args.data, schema)
    return RelationalData.from_sqlite(args.sqlite, schema)


_RELATIONAL_ESTIMATORS = ("neural", "plugin", "unlinked")


def _relational_estimator(args):
    from .relational import RelationalPluginEstimator, UnlinkedPluginEstimator
    from .relational.neural import RelationalNeuralEstimator

    if args.estimator == "plugin":
        return RelationalPluginEstimator()
    if args.estimator == "unlinked":
        return UnlinkedPluginEstimator()
    return RelationalNeuralEstimator(**_neural_settings(args))


def _relational_fit_line(est, data) -> str:
    n = sum(len(ids) for ids in data.skeleton.instances.values())
    links = sum(len(v) for v in data.skeleton.links.values())
    line = f"fitted the {est.name} estimator on {n:,} instances, {links:,} links, {data.num_draws} draw(s)"
    if hasattr(est, "neural_share_"):
        shares = ", ".join(f"{e}.{a} {s:.2f}" for (e, a), s in est.neural_share_.items())
        line += f"; weight of the neural prior per mechanism: {shares}"
    return line


def cmd_relational_fit(args) -> int:
    from .relational import read_template, write_template

    _check_writable(args.out, "--out")  # before the fit, not after minutes of it
    structure = read_template(args.template, cpts=False)
    data = _relational_data(args, structure.schema)
    est = _relational_estimator(args).fit(data, structure)
    write_template(est.template_, args.out)
    print(_relational_fit_line(est, data))
    print(f"fitted template (schema, structure and CPTs) saved to {args.out}; answer queries on any skeleton with "
          f"'intervgnn relational-query --template {args.out} ...'")
    return 0


def _entity_attribute(text: str, flag: str) -> tuple[str, str]:
    entity, dot, attribute = (text or "").partition(".")
    if not dot or not entity or not attribute:
        raise IntervgnnError(f"{flag} expects ENTITY.ATTRIBUTE, got '{text}'")
    return entity, attribute


def _relational_query(args):
    from .relational import Policy, PopulationQuery, SpilloverQuery, UnitQuery

    kinds = [k for k in ("target", "population", "spillover") if getattr(args, k)]
    if len(kinds) != 1:
        raise IntervgnnError("ask one query: --target NAME (a unit query), --population ENTITY.ATTRIBUTE or "
                             "--spillover NAME")
    if args.target:
        return UnitQuery(args.target, do=_assignments(args.do, "--do"), given=_assignments(args.given, "--given"))
    if args.population:
        entity, attribute = _entity_attribute(args.population, "--population")
        policy = None
        if args.policy:
            left, eq, state = args.policy.partition("=")
            if not eq or not state:
                raise IntervgnnError(f"--policy expects ENTITY.ATTRIBUTE=STATE, got '{args.policy}'")
            pe, pa = _entity_attribute(left, "--policy")
            units = [u.strip() for u in args.units.split(",")] if args.units else None
            policy = Policy(pe, pa, state.strip(), instances=units, share=args.share,
                            seed=check_seed(args.policy_seed, name="--policy-seed"))
        elif args.share is not None or args.units:
            raise IntervgnnError("--share and --units shape a --policy; give the policy too")
        return PopulationQuery(entity, attribute, policy)
    missing = [f for f in ("treatment", "treated", "untreated", "state") if not getattr(args, f)]
    if missing:
        raise IntervgnnError(f"--spillover needs --treatment, --treated, --untreated and --state; missing --{missing[0]}")
    te, ta = _entity_attribute(args.treatment, "--treatment")
    return SpilloverQuery(args.spillover, te, ta, args.treated, args.untreated, args.state)


def cmd_relational_query(args) -> int:
    from .relational import RelationalData, read_skeleton, read_template
    from .relational.estimate import SpilloverEffects, exact_answer

    template = read_template(args.template)
    if bool(args.skeleton) == bool(args.sqlite):
        raise IntervgnnError("give the skeleton as --skeleton FOLDER (CSV files) or --sqlite FILE, one of them")
    if args.skeleton:
        skeleton = read_skeleton(args.skeleton, template.schema)
    else:
        skeleton = RelationalData.from_sqlite(args.sqlite, template.schema).skeleton
    query = _relational_query(args)
    answer = exact_answer(template, skeleton, query)
    where = f"the template {args.template} grounded on {args.skeleton or args.sqlite}"
    if isinstance(answer, SpilloverEffects):
        payload = answer.to_dict()
        if args.json:
            print(json.dumps({"spillover": payload, "source": where, "caution": CAUTION}, indent=2))
            return 0
        print(f"Spill-over on P({query.outcome} = {query.state}) from {where}:")
        print(f"  own treatment units       {', '.join(answer.own_units) or '(none)'}")
        print(f"  neighbour treatment units {', '.join(answer.neighbour_units) or '(none)'}")
        print(f"  own alone        {answer.own:+.4f}")
        print(f"  neighbours alone {answer.neighbours:+.4f}")
        print(f"  both             {answer.both:+.4f}")
    elif args.json:
        print(json.dumps({"estimate": answer.to_dict(), "source": where, "caution": CAUTION}, indent=2))
        return 0
    else:
        print(f"Answer from {where}:")
        print(answer)
    print()
    print(CAUTION)
    return 0


def cmd_identify(args) -> int:
    from .identify import identify
    from .userdata import load_graph

    graph = load_graph(args.graph).graph
    result = identify(graph, args.target, args.do, args.given or [])
    if args.json:
        print(json.dumps({
            "query": result.query_text(),
            "identifiable": result.identifiable,
            "method": result.method,
            "formula": None if result.formula is None else str(result.formula),
            "estimand": None if result.estimand is None else str(result.estimand),
            "adjustment": None if result.adjustment is None else list(result.adjustment),
            "hedge": None if result.hedge is None else {"F": list(result.hedge[0]), "F_prime": list(result.hedge[1])},
        }, indent=2))
    else:
        print(result.describe())
    return 0 if result.identifiable else EXIT_NOT_IDENTIFIABLE


def cmd_demo(args) -> int:
    """Exact demo: how far the naive reading of data is from the interventional answer."""
    net = load_network("greenhouse")
    print("Demo network 'greenhouse' (invented): " + network_info("greenhouse").description)
    print()
    naive = net.query("Yield", given={"Irrigation": "high"})
    naive.description = "Naive reading, " + (naive.description or "")
    print(naive)
    print()
    for state, dist in net.query_each("Yield", "Irrigation").items():
        print(dist)
        print()
    tv = 0.5 * float(abs(naive.probs - net.query("Yield", do={"Irrigation": "high"}).probs).sum())
    print(f"Total variation between the naive reading and the do-answer for Irrigation=high: {tv:.4f}")
    print()
    print(CAUTION)
    return 0


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="intervgnn",
        description="Interventional distributions P(Y | do(X=x)) from causal diagrams and discrete data.",
    )
    sub = p.add_subparsers(dest="command", required=True)

    s = sub.add_parser("networks", help="list the shipped benchmark networks (and how to name a random one)")
    s.add_argument("--cite", action="store_true", help="also print each network's original publication")
    s.set_defaults(func=cmd_networks)

    s = sub.add_parser("exact", help="exact answer of a query on a network (the ground truth)")
    s.add_argument("--network", required=True, help="shipped network name, random:nodes=N,seed=S, or BIF file path")
    s.add_argument("--target", required=True, nargs="+", help="target variable(s)")
    s.add_argument("--do", action="append", metavar="X=STATE", help="intervention (repeatable)")
    s.add_argument("--given", action="append", metavar="Z=STATE", help="evidence (repeatable)")
    s.add_argument("--each", metavar="X", help="answer for every state of this intervened variable")
    s.add_argument("--json", action="store_true", help="print JSON")
    s.set_defaults(func=cmd_exact)

    s = sub.add_parser("sample", help="draw rows from a network into a CSV file")
    s.add_argument("--network", required=True)
    s.add_argument("--rows", type=int, required=True)
    s.add_argument("--do", action="append", metavar="X=STATE")
    s.add_argument("--seed", type=int, default=0)
    s.add_argument("--out", required=True)
    s.set_defaults(func=cmd_sample)

    s = sub.add_parser("fit", help="train the neural estimator on rows and save it")
    src = s.add_argument_group("rows (one of)")
    src.add_argument("--network", help="sample the rows from this network (name or BIF path)")
    src.add_argument("--rows", type=int, default=10_000, help="rows to sample with --network (default 10000)")
    src.add_argument("--data", help="CSV file of rows")
    src.add_argument("--graph", help="graph file (YAML) for --data")
    s.add_argument("--seed", type=int, default=0)
    s.add_argument("--steps", type=int, help="full-batch training steps per cross-fitted model (default 50)")
    s.add_argument("--threads", type=int, help="torch threads while fitting (default 1)")
    s.add_argument("--quiet", action="store_true", help="no progress bar")
    s.add_argument("--out", required=True, help="folder to save the model in")
    s.set_defaults(func=cmd_fit)

    s = sub.add_parser(
        "estimate", help="estimate P(target | do(...), given) from a model or from rows",
        epilog="Exit status: 0 answered, 2 an error in the input, 3 the query is not identifiable on the diagram.",
    )
    src = s.add_argument_group("source (one of)")
    src.add_argument("--model", help="a folder saved by 'intervgnn fit'")
    src.add_argument("--network", help="sample rows from this network and fit an estimator")
    src.add_argument("--rows", type=int, default=10_000, help="rows to sample with --network (default 10000)")
    src.add_argument("--data", help="CSV file of rows (with --graph)")
    src.add_argument("--graph", help="graph file (YAML)")
    s.add_argument(
        "--estimator", choices=["plugin", "neural", "estimand"], default="neural",
        help="estimator to fit (default neural; estimand: the identification formula on the rows)",
    )
    s.add_argument("--allow-unidentified", action="store_true", help="answer a non-identifiable query from the neural model, marked as such")
    s.add_argument("--target", required=True, nargs="+")
    s.add_argument("--do", action="append", metavar="X=STATE")
    s.add_argument("--given", action="append", metavar="Z=STATE")
    s.add_argument("--seed", type=int, default=0)
    s.add_argument("--steps", type=int, help="full-batch training steps per cross-fitted model (neural; default 50)")
    s.add_argument("--threads", type=int, help="torch threads while fitting and sampling (neural; default 1)")
    s.add_argument(
        "--interval", type=float, nargs="?", const=0.95, metavar="LEVEL",
        help="also a central interval on every probability (default level 0.95): the plug-in's from the posterior "
        "of its CPTs, the others' from refits on resampled rows",
    )
    s.add_argument("--draws", type=int, help="posterior draws (plug-in, default 200) or refits (others, default 50)")
    s.add_argument("--effect", metavar="X=A,B", help="the contrast P(target=STATE | do(X=A)) - P(... | do(X=B)) with "
                   "its interval, the probability that it is positive and whether the interval excludes zero")
    s.add_argument("--state", help="with --effect: the target's state compared")
    s.add_argument("--quiet", action="store_true", help="no progress bar")
    s.add_argument("--json", action="store_true")
    s.add_argument("--csv", metavar="FILE", help="also write the answer (every state, with the interval's bounds "
                   "when asked) or the effect to FILE as CSV")
    s.set_defaults(func=cmd_estimate)

    s = sub.add_parser("run", help="run an evaluation sweep from a YAML config and write tables, plots and a report")
    s.add_argument("config", help="experiment config (YAML)")
    s.add_argument("--workers", type=int, help="parallel runs (default: the config's 'workers')")
    s.add_argument("--executor", choices=["local", "ray"], help="local process pool or Ray (default: the config's)")
    s.add_argument("--address", help="address of an existing Ray cluster (with --executor ray)")
    s.add_argument("--resume", action="store_true", help="keep finished runs and do only the rest")
    s.add_argument("--output", help="output folder (default: the config's 'output')")
    s.add_argument(
        "--rows", type=int, nargs="+", metavar="N",
        help="run and summarise only these of the config's row counts (the run files are the same as a full "
        "sweep's, so a later --resume of the whole config keeps them)",
    )
    s.add_argument("--quiet", action="store_true", help="no progress bar")
    s.set_defaults(func=cmd_run)

    s = sub.add_parser(
        "identify", help="is P(target | do(...), given) identifiable on a diagram? print the estimand or the hedge",
        epilog="Exit status: 0 identifiable, 2 an error in the input, 3 not identifiable.",
    )
    s.add_argument("--graph", required=True, help="graph file (YAML); 'confounded' pairs mark hidden common causes")
    s.add_argument("--target", required=True, nargs="+")
    s.add_argument("--do", required=True, nargs="+", metavar="X", help="intervened variable(s)")
    s.add_argument("--given", nargs="+", metavar="Z", help="observed variable(s)")
    s.add_argument("--json", action="store_true")
    s.set_defaults(func=cmd_identify)

    s = sub.add_parser(
        "relational-fit", help="fit a relational template's CPTs on relational data and save the fitted template",
    )
    s.add_argument("--template", required=True, help="template file (YAML): schema and structure; CPTs may be left out")
    s.add_argument("--data", help="folder of CSV files: one per entity type (id, attributes), one per relationship")
    s.add_argument("--sqlite", help="SQLite database file with the same tables")
    s.add_argument("--estimator", choices=_RELATIONAL_ESTIMATORS, default="neural",
                   help="neural (default), plugin (tied counts) or unlinked (counts that ignore the links)")
    s.add_argument("--seed", type=int, default=0)
    s.add_argument("--steps", type=int, help="full-batch training steps per cross-fitted model (neural; default 100)")
    s.add_argument("--threads", type=int, help="torch threads while fitting (neural; default 1)")
    s.add_argument("--quiet", action="store_true", help="no progress bar")
    s.add_argument("--out", required=True, help="file to write the fitted template to (YAML)")
    s.set_defaults(func=cmd_relational_fit)

    s = sub.add_parser(
        "relational-query",
        help="answer a unit, population or spill-over do-query with a (fitted) template on a skeleton",
    )
    s.add_argument("--template", required=True, help="template file with CPTs (e.g. written by relational-fit)")
    s.add_argument("--skeleton", help="folder of CSV files with the instances and links (attribute columns ignored)")
    s.add_argument("--sqlite", help="SQLite database file holding the skeleton")
    s.add_argument("--target", help="unit query: an instance attribute, e.g. orchard_17__Yield")
    s.add_argument("--do", action="append", metavar="NAME=STATE", help="unit query: an intervention (repeatable)")
    s.add_argument("--given", action="append", metavar="NAME=STATE", help="unit query: evidence (repeatable)")
    s.add_argument("--population", metavar="ENTITY.ATTRIBUTE", help="population query: the average over all instances")
    s.add_argument("--policy", metavar="ENTITY.ATTRIBUTE=STATE", help="population query: the intervention policy")
    s.add_argument("--share", type=float, help="policy on a seeded random share of the instances (0 to 1)")
    s.add_argument("--units", metavar="ID,ID", help="policy on these instances only")
    s.add_argument("--policy-seed", type=int, default=0, help="seed of the --share draw (default 0)")
    s.add_argument("--spillover", metavar="NAME", help="spill-over query on this outcome, e.g. orchard_17__Yield")
    s.add_argument("--treatment", metavar="ENTITY.ATTRIBUTE", help="spill-over: the treatment attribute")
    s.add_argument("--treated", help="spill-over: the treatment's treated state")
    s.add_argument("--untreated", help="spill-over: the treatment's untreated state")
    s.add_argument("--state", help="spill-over: the outcome state compared")
    s.add_argument("--json", action="store_true")
    s.set_defaults(func=cmd_relational_query)

    s = sub.add_parser("demo", help="a short demonstration on the invented greenhouse network")
    s.set_defaults(func=cmd_demo)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except IntervgnnError as exc:
        print(f"intervgnn: error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
