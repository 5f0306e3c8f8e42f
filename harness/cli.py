"""The command line: ``boundbreaker <command> ...``.

Exit codes: 0 pass, 1 violation found, 2 bad usage or bad input,
3 inconclusive, 4 internal error (a bug in boundbreaker: please report it).
Errors are one line on stderr; set ``BOUNDBREAKER_DEBUG=1`` for a traceback.
"""

from __future__ import annotations

import argparse
import json
import os
import sys

from .errors import BoundbreakerError, ConfigError

EXIT_PASS, EXIT_VIOLATION, EXIT_USAGE, EXIT_INCONCLUSIVE, EXIT_INTERNAL = 0, 1, 2, 3, 4


class _Parser(argparse.ArgumentParser):
    """argparse, but a usage error is one line naming the fix, exit 2."""

    def error(self, message):
        raise ConfigError(f"{self.prog}: {message} (see `{self.prog} --help`)")


def parse_param(text: str, option: str) -> tuple[str, object]:
    """``KEY=VALUE`` -> (key, value); VALUE is read as JSON when it parses
    (numbers, true/false, lists), else kept as a string."""
    key, sep, raw = text.partition("=")
    if not sep or not key.strip():
        raise ConfigError(f"{option} {text!r}: write KEY=VALUE, e.g. {option} eta=0.1")
    try:
        value = json.loads(raw)
    except json.JSONDecodeError:
        value = raw
    return key.strip(), value


def params_from(items, option: str) -> dict:
    return dict(parse_param(item, option) for item in (items or []))


def _add_run(sub):
    p = sub.add_parser("run", help="play one learner against one adversary and summarise the tails")
    p.add_argument("--learner", required=True, help="registry name or module:Class")
    p.add_argument("--adversary", required=True, help="registry name or module:Class")
    p.add_argument("--learner-param", action="append", metavar="KEY=VALUE", help="learner parameter (repeatable)")
    p.add_argument("--adversary-param", action="append", metavar="KEY=VALUE",
                   help="adversary parameter (repeatable), e.g. p=0.3")
    p.add_argument("--horizon", type=int, required=True, help="rounds T")
    p.add_argument("--actions", type=int, required=True, help="number of actions n")
    p.add_argument("--replicas", type=int, default=1000)
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--jobs", type=int, default=1, help="parallel jobs (-1: all cores)")
    p.add_argument("--switching-cost", type=float, default=0.0)
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    _add_scale_options(p)
    p.set_defaults(handler=_cmd_run)


def _add_scale_options(p):
    p.add_argument("--cluster", metavar="ADDRESS",
                   help="run chunks on a dask cluster: 'local' or a scheduler address tcp://host:8786")
    p.add_argument("--checkpoint", metavar="DIR",
                   help="save finished chunks in DIR; rerunning the same command resumes from them")


def _scaled(args):
    """A context in which the --cluster choice holds (a no-op without it)."""
    from contextlib import nullcontext

    if not args.cluster:
        return nullcontext()
    from .cluster import cluster

    if args.jobs in (1, None):
        args.jobs = -1  # a cluster is pointless one chunk at a time
    return cluster(args.cluster)


def _cmd_run(args) -> int:
    from . import run
    from .learners import get as get_learner
    import adversaries

    for option, value in (("--horizon", args.horizon), ("--actions", args.actions),
                          ("--replicas", args.replicas)):
        if value < (2 if option == "--actions" else 1):
            raise ConfigError(f"{option}: must be at least {2 if option == '--actions' else 1}, got {value}")
    if args.seed < 0:
        raise ConfigError(f"--seed: must be >= 0, got {args.seed}")
    if not args.switching_cost >= 0 or args.switching_cost == float("inf"):
        raise ConfigError(f"--switching-cost: must be a finite number >= 0, got {args.switching_cost}")
    learner = _named(get_learner, args.learner, params_from(args.learner_param, "--learner-param"),
                     "--learner", "--learner-param")
    adversary = _named(adversaries.get, args.adversary,
                       params_from(args.adversary_param, "--adversary-param"), "--adversary",
                       "--adversary-param")
    with _scaled(args):
        result = run(learner, adversary, args.horizon, args.actions, replicas=args.replicas, seed=args.seed,
                     n_jobs=args.jobs, switching_cost=args.switching_cost, progress=True,
                     checkpoint=args.checkpoint)
    if args.json:
        print(json.dumps({"summary": result.summary(), "meta": result.meta}, indent=2))
    else:
        print(format_run(result))
    return EXIT_PASS


def _named(getter, name, params, option, param_option):
    """Build from a registry, naming the CLI option in the error."""
    try:
        return getter(name, **params)
    except ConfigError as exc:
        text = str(exc)
        which = param_option if params and "unknown name" not in text else option
        raise ConfigError(f"{which}: {text}") from None


def format_run(result) -> str:
    m = result.meta
    seq = ("one sequence shared by all replicas" if m["shared_sequence"]
           else "adaptive" if m["adaptive"] else "one sequence per replica")
    head = [f"learner   {_spec_text(m['learner'])}",
            f"adversary {_spec_text(m['adversary'])} ({seq})",
            f"T={m['horizon']} n={m['n_actions']} replicas={m['replicas']} seed={m['seed']} "
            f"wall={m['wall_time_s']:.2f}s"]
    rows = [f"{'metric':<12}{'mean':>12}{'median':>12}{'p95':>12}{'p99':>12}{'max':>12}"]
    for name, stats in result.summary().items():
        rows.append(f"{name:<12}" + "".join(f"{stats[k]:>12.4g}" for k in ("mean", "median", "p95", "p99", "max")))
    return "\n".join(head + [""] + rows)


def _spec_text(spec: dict) -> str:
    params = ", ".join(f"{k}={v}" for k, v in spec.get("params", {}).items())
    return f"{spec.get('name') or spec.get('class')}({params})"


def _add_list(sub):
    p = sub.add_parser("list", help="list the registered learners and adversaries")
    p.add_argument("what", nargs="?", choices=["learners", "adversaries"], help="only one registry")
    p.set_defaults(handler=_cmd_list)


def _cmd_list(args) -> int:
    from .learners import describe as describe_learners
    import adversaries

    sections = [("learners", describe_learners()), ("adversaries", adversaries.describe())]
    for title, rows in sections:
        if args.what and args.what != title:
            continue
        print(f"{title}:")
        for name, text, params in rows:
            shown = ", ".join(f"{k}={v!r}" for k, v in params.items()) or "-"
            print(f"  {name:<22}{text}\n  {'':<22}params: {shown}")
        print()
    return EXIT_PASS


def _add_bench(sub):
    p = sub.add_parser("bench", help="measure throughput (replica-rounds/s), memory and scaling")
    p.add_argument("--horizon", type=int, default=100_000)
    p.add_argument("--replicas", type=int, default=1024)
    p.add_argument("--actions", type=int, default=10)
    p.add_argument("--large-actions", type=int, default=1000, help="n of the second throughput table")
    p.add_argument("--large-horizon", type=int, default=10_000, help="horizon of the second throughput table")
    p.add_argument("--learners", default=None, help="comma-separated names (default: all reference learners)")
    p.add_argument("--sections", default=None,
                   help="comma-separated subset of throughput,large,bandwidth,memory,sweep,scaling (default: all)")
    p.add_argument("--quick", action="store_true", help="smaller sizes, for a smoke test")
    p.add_argument("--json", action="store_true")
    p.add_argument("--studies", action="store_true",
                   help="instead, run the long statistical studies and benchmarks of the source checkout's "
                        "test suite (pytest markers slow and bench, which CI skips)")
    p.set_defaults(handler=_cmd_bench)


def _cmd_bench(args) -> int:
    from . import bench

    if args.studies:
        return bench.studies()

    sections = tuple(s.strip() for s in args.sections.split(",")) if args.sections else bench.SECTIONS
    report = bench.main(horizon=args.horizon, replicas=args.replicas, n_actions=args.actions,
                        learners=args.learners.split(",") if args.learners else None, quick=args.quick,
                        large_actions=args.large_actions, large_horizon=args.large_horizon, sections=sections)
    print(json.dumps(report, indent=2) if args.json else bench.format_report(report))
    return EXIT_PASS


def _add_search(sub):
    p = sub.add_parser("search", help="search for a loss sequence that breaks a campaign's claim; save it")
    p.add_argument("campaign", metavar="CAMPAIGN.toml", nargs="?",
                   help="campaign file ([learner], [[claims]], [grid], [search])")
    p.add_argument("--demo", action="store_true",
                   help="search the bundled demo (a model fleet whose controller is tuned too hot)")
    p.add_argument("--claim", help="search only this claim (by name); default: every claim, in order")
    p.add_argument("--method", choices=["hypothesis", "cem", "random"],
                   help="search method (default: the campaign's [search] method, else hypothesis)")
    p.add_argument("--out", default=None, metavar="FILE",
                   help="where to save a counterexample (default: <campaign name>-counterexample.npz)")
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(handler=_cmd_search)


def _cmd_search(args) -> int:
    from .search.campaign import demo_path, search_campaign

    if args.demo == bool(args.campaign):
        raise ConfigError("search: give a campaign file (CAMPAIGN.toml) or --demo, not both or neither")

    def progress(cell):
        name, horizon, n, found = cell
        print(f"searched {name} T={horizon} n={n}: {'found' if found else 'nothing'} "
              f"({found.evaluations} evaluations)", file=sys.stderr)

    outcome = search_campaign(demo_path() if args.demo else args.campaign, claim=args.claim, method=args.method,
                              out=args.out,
                              progress=None if args.json or not sys.stderr.isatty() else progress)
    if args.json:
        print(json.dumps(outcome.as_dict(), indent=2))
    else:
        print(outcome.describe())
    return EXIT_VIOLATION if outcome.found else EXIT_PASS


def _add_replay(sub):
    p = sub.add_parser("replay", help="rerun a saved counterexample; exit 1 if the learner still breaks the claim")
    p.add_argument("file", metavar="FILE", help="a counterexample .npz written by `boundbreaker search`")
    p.add_argument("--learner", help="registry name or module:Class (default: the learner named in the file)")
    p.add_argument("--learner-param", action="append", metavar="KEY=VALUE", help="learner parameter (repeatable)")
    p.add_argument("--replicas", type=int, help="replicas (default: as recorded)")
    p.add_argument("--seed", type=int, help="seed (default: the recorded one, which reproduces the file exactly)")
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(handler=_cmd_replay)


def _cmd_replay(args) -> int:
    from .learners import get as get_learner
    from .search import Counterexample, replay
    from .search.replay import learner_from_spec

    if args.replicas is not None and args.replicas < 1:
        raise ConfigError(f"--replicas: must be at least 1, got {args.replicas}")
    if args.seed is not None and args.seed < 0:
        raise ConfigError(f"--seed: must be >= 0, got {args.seed}")
    ce = Counterexample.load(args.file)
    if args.learner:
        learner = _named(get_learner, args.learner, params_from(args.learner_param, "--learner-param"),
                         "--learner", "--learner-param")
    elif args.learner_param:
        raise ConfigError("--learner-param: give --learner too (the parameters belong to a named learner)")
    else:
        learner = learner_from_spec(ce.learner)
    result = replay(ce, learner, replicas=args.replicas, seed=args.seed)
    if args.json:
        print(json.dumps({"still_violates": result.still_violates, "rate": result.rate, "ci": list(result.ci),
                          "mean": result.mean, "violations": result.violations, "replicas": result.replicas,
                          "seed": result.seed, "confidence": result.confidence, "bound": result.bound,
                          "claim": ce.claim.spec(), "learner": learner.spec(), "evidence": result.evidence},
                         indent=2, default=str))
    else:
        print(result.describe())
    return EXIT_VIOLATION if result.still_violates else EXIT_PASS


def _add_certify(sub):
    p = sub.add_parser("certify", help="judge a learner's claims on a campaign's battery; writes a certificate",
                       description="Certify the claims of a campaign file (or the bundled demo). Without --out or "
                                   "--report, the certificate and a Markdown summary go to reports/<campaign name>/.")
    p.add_argument("campaign", nargs="?", metavar="CAMPAIGN.toml", help="campaign file (see DEVELOPERS.md)")
    p.add_argument("--demo", action="store_true", help="certify the bundled demo campaign (an edge router)")
    p.add_argument("--report", metavar="DIR", help="write the report into DIR: certificate.json, report.html "
                                                     "(self-contained), summary.md and figures/")
    p.add_argument("--out", metavar="FILE", help="write the certificate JSON to FILE (no report directory "
                                                   "unless --report is also given)")
    p.add_argument("--jobs", type=int, default=None, help="parallel jobs (-1: all cores); overrides the campaign")
    _add_scale_options(p)
    p.set_defaults(handler=_cmd_certify)


def _cmd_certify(args) -> int:
    from .certify import certify_campaign, write_report
    from .config import demo_path, load_campaign

    if args.demo and args.campaign:
        raise ConfigError("certify: give a campaign file or --demo, not both")
    if not args.demo and not args.campaign:
        raise ConfigError("certify: give a campaign file (CAMPAIGN.toml) or --demo")
    if args.jobs is not None and args.jobs == 0:
        raise ConfigError("--jobs: must be a non-zero integer (-1 = all cores), got 0")
    campaign = load_campaign(demo_path() if args.demo else args.campaign)
    if not campaign.claims:
        raise ConfigError(f"{args.campaign or 'demo'}: claims: the campaign has none; add [[claims]] tables "
                          f"or set campaign.use_learner_claims = true")
    written = []
    if args.out:  # fail on an unwritable path before the work, not after
        _writable(args.out, "--out")
    report = args.report or (None if args.out else os.path.join("reports", _slug(campaign.name)))
    with _scaled(args):
        cert = certify_campaign(campaign, n_jobs=args.jobs, progress=True, checkpoint=args.checkpoint)
    print(cert.table())
    if args.out:
        written.append(cert.save(args.out))
    if report:
        # the campaign's own objects: a report never imports code named in a certificate
        written.extend(write_report(cert, report, learner=campaign.build_learner(),
                                    adversaries=campaign.build_adversaries(), n_jobs=args.jobs or 1).values())
    for path in written:
        print(f"wrote {path}")
    return {"pass": EXIT_PASS, "fail": EXIT_VIOLATION}.get(cert.verdict, EXIT_INCONCLUSIVE)


def _writable(path, option):
    folder = os.path.dirname(os.path.abspath(path))
    if os.path.isdir(path):
        raise ConfigError(f"{option} {path}: is a directory; give a file name such as certificate.json")
    if not os.path.isdir(folder):
        raise ConfigError(f"{option} {path}: folder {folder} does not exist; create it or choose another path")


def _slug(name: str) -> str:
    keep = "".join(ch.lower() if ch.isalnum() else "-" for ch in name).strip("-")
    return "-".join(part for part in keep.split("-") if part) or "campaign"


COMMANDS = [_add_run, _add_list, _add_bench]
COMMANDS.append(_add_certify)
COMMANDS += [_add_search, _add_replay]


def _add_report(sub):
    p = sub.add_parser("report", help="write the HTML and Markdown report of a saved certificate",
                       description="Rebuild a certificate's report: report.html (self-contained), summary.md, "
                                   "figures/ and a copy of the certificate. Tail curves come from replaying each "
                                   "group exactly from the seeds the certificate records.")
    p.add_argument("certificate", metavar="CERT.json", help="a certificate written by boundbreaker certify")
    p.add_argument("--out", metavar="DIR", help="output directory (default: the certificate's folder)")
    p.add_argument("--no-replay", action="store_true", help="skip the replay: no tail curves (fast)")
    p.add_argument("--replay-limit", type=int, default=None, metavar="N",
                   help="replay at most N replicas per group (whole chunks; default 4096)")
    p.add_argument("--jobs", type=int, default=1, help="parallel jobs for the replay (-1: all cores)")
    p.add_argument("--learner", metavar="NAME|module:Class",
                   help="the learner that was certified (default: rebuilt from the certificate when it is a "
                        "registered name; code named in a file is never imported)")
    p.add_argument("--learner-param", action="append", metavar="KEY=VALUE", help="learner parameter (repeatable)")
    p.set_defaults(handler=_cmd_report)


def _cmd_report(args) -> int:
    from .certify import Certificate
    from .report import write_report
    from .report.replay import DEFAULT_LIMIT

    if args.jobs == 0:
        raise ConfigError("--jobs: must be a non-zero integer (-1 = all cores), got 0")
    limit = DEFAULT_LIMIT if args.replay_limit is None else args.replay_limit
    if limit < 1:
        raise ConfigError(f"--replay-limit: must be a positive number of replicas, got {limit}")
    out = args.out or os.path.dirname(os.path.abspath(args.certificate))
    if os.path.exists(out) and not os.path.isdir(out):
        raise ConfigError(f"--out {out}: is a file; give a directory")
    learner = None
    if args.learner:
        from .learners import get as get_learner
        learner = _named(get_learner, args.learner, params_from(args.learner_param, "--learner-param"),
                         "--learner", "--learner-param")
    elif args.learner_param:
        raise ConfigError("--learner-param: only with --learner")
    cert = Certificate.load(args.certificate)
    for path in write_report(cert, out, learner=learner, replay=not args.no_replay, limit=limit,
                             n_jobs=args.jobs).values():
        print(f"wrote {path}")
    return EXIT_PASS


COMMANDS.append(_add_report)


def _add_landscape(sub):
    p = sub.add_parser("landscape", help="regret against a switching budget S for budgeted learners",
                       description="Sweep the switching budget S over a grid; each budgeted learner plays the "
                                   "lower-bound adversaries built for S. Prints fitted slopes and the knee; writes "
                                   "landscape.png, landscape-cost.png and landscape-<feedback>.json.")
    p.add_argument("--demo", action="store_true",
                   help="the bundled study: experts and bandits, T=10000, n=4, both block-random variants")
    p.add_argument("--feedback", choices=["full", "bandit", "both"], default=None,
                   help="which families (default: full, or both with --demo)")
    p.add_argument("--learners", help="comma-separated families (see harness.landscape.LEARNERS)")
    p.add_argument("--adversaries", help="comma-separated families (see harness.landscape.ADVERSARIES)")
    p.add_argument("--horizon", type=int, default=10_000)
    p.add_argument("--actions", type=int, default=4)
    p.add_argument("--budgets", help="comma-separated budgets S (default: powers of two from 2 below T/4)")
    p.add_argument("--replicas", type=int, default=256)
    p.add_argument("--quantile", type=float, default=0.9, help="which quantile of regret (default 0.9)")
    p.add_argument("--confidence", type=float, default=0.95, help="of each quantile interval")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--costs", help="comma-separated switching costs C (default: chosen from the reference rates)")
    p.add_argument("--no-costs", action="store_true", help="skip the switching-cost mode")
    p.add_argument("--jobs", type=int, default=1, help="parallel jobs (-1: all cores)")
    p.add_argument("--out", metavar="DIR", help="output directory (default reports/landscape or "
                                                "reports/landscape-demo)")
    p.set_defaults(handler=_cmd_landscape)


LANDSCAPE_DEMO = ("demo (invented): a fleet of edge caches picks one of n = 4 eviction policies every second; each "
                  "policy change flushes the cache, so operators budget S changes per 10000 seconds. How much worse "
                  "than the best fixed policy can a budgeted learner be forced to do, as S grows?\n")


def _number_list(text, option, kind):
    try:
        return [kind(x) for x in text.split(",") if x.strip()]
    except ValueError:
        raise ConfigError(f"{option} {text!r}: give comma-separated {'integers' if kind is int else 'numbers'}, "
                          f"e.g. {option} {'2,4,8' if kind is int else '0.1,1,10'}") from None


def _cmd_landscape(args) -> int:
    from .landscape import ADVERSARIES, LEARNERS, figure, format_table, landscape
    from .report.figures import png_bytes

    if args.jobs == 0:
        raise ConfigError("--jobs: must be a non-zero integer (-1 = all cores), got 0")
    if args.costs and args.no_costs:
        raise ConfigError("--costs: give --costs or --no-costs, not both")
    feedback = args.feedback or ("both" if args.demo else "full")
    names = {"learners": args.learners.split(",") if args.learners else None,
             "adversaries": args.adversaries.split(",") if args.adversaries else None}
    if args.demo and names["adversaries"] is None:
        names["adversaries"] = ["block-random", "block-random-aligned", "multiscale-walk"]
    plans = []
    for fb in (("full", "bandit") if feedback == "both" else (feedback,)):
        chosen = {}
        for key, table in (("learners", LEARNERS), ("adversaries", ADVERSARIES)):
            given = names[key]
            if given is None:
                chosen[key] = None
                continue
            given = [x.strip() for x in given if x.strip()]
            for x in given:
                if x not in table:
                    raise ConfigError(f"--{key}: unknown family {x!r}; choose from {', '.join(table)}")
            # with both feedbacks, each landscape takes the families of its own feedback
            picked = [x for x in given if feedback != "both" or table[x].feedback == fb]
            chosen[key] = picked or None
        plans.append((fb, chosen))
    budgets = _number_list(args.budgets, "--budgets", int) if args.budgets else None
    costs = () if args.no_costs else (_number_list(args.costs, "--costs", float) if args.costs else None)
    results = []
    for fb, chosen in plans:
        results.append(landscape(chosen["learners"], chosen["adversaries"], budgets, args.horizon, args.actions,
                                 args.replicas, args.quantile, args.confidence, args.seed, args.jobs, feedback=fb,
                                 switching_costs=costs, progress=True))
    if args.demo:
        print(LANDSCAPE_DEMO)
    print(format_table(results), end="")
    out = args.out or os.path.join("reports", "landscape-demo" if args.demo else "landscape")
    try:
        os.makedirs(out, exist_ok=True)
    except OSError as exc:
        raise ConfigError(f"--out {out}: cannot create the directory ({exc.strerror}); choose a writable path") from None
    written = []
    path = os.path.join(out, "landscape.png")
    with open(path, "wb") as fh:
        fh.write(png_bytes(figure(results, "regret")))
    written.append(path)
    if any(r.cost_points for r in results):
        path = os.path.join(out, "landscape-cost.png")
        with open(path, "wb") as fh:
            fh.write(png_bytes(figure(results, "cost")))
        written.append(path)
    for r in results:
        written.append(r.save(os.path.join(out, f"landscape-{r.feedback}.json")))
    for path in written:
        print(f"wrote {path}")
    return EXIT_PASS


COMMANDS.append(_add_landscape)


def _add_baseline(sub):
    p = sub.add_parser("baseline", help="record a learner's tail profile on a campaign's battery (commit it)",
                       description="Record the quantiles of regret and switches of the campaign's learner on every "
                                   "cell of its battery, with order-statistic intervals, as a JSON profile meant to "
                                   "be committed; `boundbreaker compare` tests new versions against it. Settings "
                                   "come from the campaign's [baseline] section (DEVELOPERS.md).")
    p.add_argument("campaign", metavar="CAMPAIGN.toml", help="campaign file (see DEVELOPERS.md)")
    p.add_argument("--out", required=True, metavar="PROFILE.json", help="where to write the profile")
    p.add_argument("--jobs", type=int, default=None, help="parallel jobs (-1: all cores); overrides the campaign")
    p.set_defaults(handler=_cmd_baseline)


def _cmd_baseline(args) -> int:
    from .baseline import record_campaign
    from .config import load_campaign

    _jobs(args.jobs)
    campaign = load_campaign(args.campaign)
    _writable(args.out, "--out")
    profile = record_campaign(campaign, n_jobs=args.jobs, progress=True)
    print(profile.table())
    print(f"wrote {profile.save(args.out)}")
    return EXIT_PASS


def _add_compare(sub):
    p = sub.add_parser("compare", help="test a learner's tails against a recorded profile; exit 1 on a regression",
                       description="Replay the profile's battery with fresh seeds and test, per cell, metric and "
                                   "quantile, whether the rate of exceeding the recorded quantile rose (regressed) "
                                   "or fell (improved), family-wise over all tests. Exit 1 on a regression, 0 "
                                   "otherwise, 2 on bad input (a campaign whose battery differs from the "
                                   "profile's included).")
    p.add_argument("profile", metavar="PROFILE.json", help="a profile written by `boundbreaker baseline`")
    p.add_argument("campaign", nargs="?", metavar="CAMPAIGN.toml",
                   help="check that the profile is this campaign's, and compare its learner")
    p.add_argument("--learner", help="registry name or module:Class (default: the campaign's, else the profile's)")
    p.add_argument("--learner-param", action="append", metavar="KEY=VALUE",
                   help="learner parameter (repeatable); without --learner, changes the default learner's")
    p.add_argument("--seed", type=int, default=None, help="root seed of the new replicas (default: the profile's + 1)")
    p.add_argument("--replicas", type=int, default=None,
                   help="new replicas per cell (default: the profile's reference replicas)")
    p.add_argument("--jobs", type=int, default=None, help="parallel jobs (-1: all cores)")
    p.add_argument("--out", metavar="FILE", help="also write the comparison as JSON")
    p.set_defaults(handler=_cmd_compare)


def _cmd_compare(args) -> int:
    from .baseline import TailProfile, check_campaign, compare, rebuild
    from .config import load_campaign
    from .learners import get as get_learner

    _jobs(args.jobs)
    for option, value, low in (("--seed", args.seed, 0), ("--replicas", args.replicas, 1)):
        if value is not None and value < low:
            raise ConfigError(f"{option}: must be at least {low}, got {value}")
    if args.out:
        _writable(args.out, "--out")
    profile = TailProfile.load(args.profile)
    jobs, advs = args.jobs, None
    if args.campaign:
        campaign = load_campaign(args.campaign)
        check_campaign(profile, campaign, args.profile)
        jobs = campaign.n_jobs if jobs is None else jobs
        advs = campaign.build_adversaries()
    for folder in (os.getcwd(), os.path.dirname(os.path.abspath(args.profile))):
        if folder not in sys.path:  # module:Class learners given with --learner, next to the profile or here
            sys.path.append(folder)
    params = params_from(args.learner_param, "--learner-param")
    if args.learner:
        learner = _named(get_learner, args.learner, params, "--learner", "--learner-param")
    elif args.campaign:
        spec = campaign.learner_spec
        learner = _named(get_learner, spec["name"], {**spec["params"], **params}, "--learner", "--learner-param")
    else:  # the profile's own learner: registered names only, never code named in the file
        learner = rebuild(profile.learner, "learner", "--learner NAME|module:Class")
        if params:
            learner = _named(get_learner, profile.learner["name"], {**profile.learner["params"], **params},
                             "--learner", "--learner-param")
    result = compare(profile, learner, seed=args.seed, replicas=args.replicas, adversaries=advs, n_jobs=jobs or 1,
                     progress=True)
    print(result.table())
    if args.out:
        print(f"wrote {result.save(args.out)}")
    return EXIT_VIOLATION if result.verdict == "regressed" else EXIT_PASS


def _jobs(value):
    if value is not None and value == 0:
        raise ConfigError("--jobs: must be a non-zero integer (-1 = all cores), got 0")


COMMANDS += [_add_baseline, _add_compare]


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="boundbreaker", description="Put online learners under adversarial stress.")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    for add in COMMANDS:
        add(sub)
    return parser


def main(argv=None) -> int:
    try:
        args = build_parser().parse_args(argv)
        return args.handler(args)
    except BoundbreakerError as exc:
        print(f"boundbreaker: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("boundbreaker: interrupted", file=sys.stderr)
        return 130
    except SystemExit as exc:  # --help and friends
        return exc.code if isinstance(exc.code, int) else 0
    except Exception as exc:  # a bug of ours: one line, and the way to see more
        if os.environ.get("BOUNDBREAKER_DEBUG"):
            raise
        print(f"boundbreaker: internal error: {type(exc).__name__}: {exc} "
              f"(rerun with BOUNDBREAKER_DEBUG=1 for a traceback, and please report it)", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
