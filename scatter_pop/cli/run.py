"""``scatter-pop run SPEC``: integrate an ensemble into a run folder (resumable).

Every flag, the spec, the cluster table and the walltime are checked before a folder is made or a
worker started; ``--dry-run`` does the same checks, prints the plan and, for a batch cluster, the
worker job script that would be submitted, and changes nothing.
"""

from __future__ import annotations

import sys
from pathlib import Path

from scatter_pop.cli.options import integer_flag, number_flag, output_folder
from scatter_pop.errors import InputError
from scatter_pop.spec.reader import load_spec

__all__ = ["configure", "execute"]

ARGUMENT_FLAGS = {"batch_size": "--batch-size", "cluster": "--cluster"}


def configure(parser) -> None:
    parser.add_argument("spec", metavar="SPEC", help="ensemble spec (TOML)")
    parser.add_argument(
        "--out",
        metavar="DIR",
        help="run folder (default: <folder of SPEC>/<run name>_out); rerunning the same command resumes there",
    )
    parser.add_argument(
        "--workers",
        metavar="N",
        help="local worker processes (default: one per core), or for slurm/pbs the number of worker processes to keep",
    )
    parser.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="attach to a running Dask scheduler (tcp://host:port or a scheduler file)",
    )
    parser.add_argument("--cluster", metavar="FILE", help="TOML file with a [cluster] table used instead of the spec's")
    parser.add_argument(
        "--fresh", action="store_true", help="start over: move an existing run folder aside to <DIR>.replaced-<time>"
    )
    parser.add_argument(
        "--extend", action="store_true", help="continue systems stopped by the wall-clock cap from their checkpoints"
    )
    parser.add_argument("--retry-failed", action="store_true", help="compute systems recorded as failed again")
    parser.add_argument(
        "--dry-run",
        action="store_true",
        help="check everything, print what would be computed (and the job script of a batch cluster), change nothing",
    )
    parser.add_argument("--batch-size", metavar="N", help="systems per task (default: run.batch_size; 0 = automatic)")
    parser.add_argument(
        "--until-width",
        type=float,
        metavar="W",
        help="campaign: add systems in index order (rounds from run.systems up) until the interval of the fraction "
        "of settled or likely-stable systems like --target is at most W wide (a fraction, e.g. 0.05)",
    )
    parser.add_argument("--target", metavar="FILE", help="with --until-width: the target planet ([target] table, TOML)")
    parser.add_argument(
        "--cpu-budget",
        type=float,
        metavar="SECONDS",
        help="with --until-width: start no round once this much CPU time has been spent integrating",
    )
    parser.add_argument(
        "--max-systems", type=int, metavar="N", help="with --until-width: largest ensemble (default 100 x run.systems)"
    )
    parser.add_argument(
        "--progress-every",
        default="10",
        metavar="SECONDS",
        help="seconds between progress lines in a log (default 10; a terminal shows a bar)",
    )


def _until_options(args, spec):
    """The campaign flags, checked (None without --until-width)."""
    if args.until_width is None:
        for flag, value in (
            ("--target", args.target),
            ("--cpu-budget", args.cpu_budget),
            ("--max-systems", args.max_systems),
        ):
            if value is not None:
                raise InputError(f"{flag} is only used with --until-width W")
        return None
    if not 0 < args.until_width < 1:
        raise InputError(f"--until-width {args.until_width}: must be a fraction between 0 and 1 (e.g. 0.05)")
    if args.target is None:
        raise InputError("--until-width needs --target FILE (the planet whose fraction is to be made precise)")
    if args.cpu_budget is not None and not args.cpu_budget > 0:
        raise InputError(f"--cpu-budget {args.cpu_budget}: must be a number of seconds > 0")
    if args.max_systems is not None and args.max_systems < spec.run.systems:
        raise InputError(f"--max-systems {args.max_systems}: must be at least run.systems = {spec.run.systems}")
    from scatter_pop.cli.demo import load_demo_target

    target, _, _ = load_demo_target(args.target)
    return {"target": target}


def execute(args) -> int:
    from scatter_pop.ensemble import progress
    from scatter_pop.ensemble.cluster import apply_overrides, job_script, load_cluster_file
    from scatter_pop.ensemble.driver import EnsembleRun, default_out
    from scatter_pop.ensemble.stop_signals import stop_signals
    from scatter_pop.spec.cluster_table import BATCH

    spec = load_spec(args.spec)
    workers = None if args.workers is None else integer_flag(args.workers, "--workers", 1, 100_000)
    batch_size = None if args.batch_size is None else integer_flag(args.batch_size, "--batch-size", 0, 10_000_000)
    interval = number_flag(args.progress_every, "--progress-every", "a number of seconds > 0", lambda x: 0 < x <= 1e6)
    if args.scheduler is not None and (workers is not None or args.cluster is not None):
        flag = "--workers" if workers is not None else "--cluster"
        raise InputError(
            f"--scheduler {args.scheduler} with {flag}: give one (an existing scheduler brings its own workers)"
        )
    if args.cluster is not None and not Path(args.cluster).is_file():
        raise InputError(f"--cluster = {args.cluster!r}: no such file; expected a TOML file with a [cluster] table")
    until = _until_options(args, spec)  # checked before anything is computed
    cluster = load_cluster_file(args.cluster) if args.cluster else spec.cluster
    resolved = apply_overrides(cluster, workers, args.scheduler)  # checks the flags now
    out = output_folder(args.out) if args.out is not None else default_out(spec)
    log = print if args.verbosity >= 0 else (lambda *_: None)
    run = EnsembleRun(
        spec,
        out,
        workers=workers,
        scheduler=args.scheduler,
        cluster=cluster,
        fresh=args.fresh,
        extend=args.extend,
        retry_failed=args.retry_failed,
        batch_size=batch_size,
        progress_interval=interval,
        log=log,
    )
    if until is not None and not args.dry_run:
        from scatter_pop.target.campaign import run_until

        options = {k: getattr(run, k) for k in ("workers", "scheduler", "cluster", "fresh", "extend", "retry_failed")}
        with stop_signals("scatter-pop run"):
            campaign = run_until(
                spec,
                out,
                until["target"],
                width=args.until_width,
                cpu_budget=args.cpu_budget,
                max_systems=args.max_systems,
                batch_size=batch_size,
                progress_interval=interval,
                **options,
            )
        print(
            f"done: {campaign.steps[-1].systems} systems in {run.out / 'ensemble.nc'} (stopped: {campaign.stopped_by})"
        )
        return 0
    if args.dry_run:
        plan = run.plan()
        if resolved.kind in BATCH:
            # the walltime check of the real run, then the script dask-jobqueue would submit
            script = job_script(resolved, longest_task_seconds=run.longest_task_seconds(plan))
            print(plan.summary())
            print(f"cluster: {resolved.kind} jobs; each worker job is submitted with this script:")
            print(script.rstrip("\n"))
        else:
            print(plan.summary())
            where = (
                resolved.address
                if resolved.kind == "address"
                else (f"{resolved.workers} workers" if resolved.workers else "one worker per core")
            )
            print(f"cluster: {resolved.kind} ({where})")
        print("nothing was computed (--dry-run)")
        return 0
    progress.BAR = args.verbosity >= 0 and sys.stderr.isatty()
    # SIGTERM (preemption, scancel) and SIGINT (Ctrl-C) stop the run at a safe point with one line
    # on stderr and exit status 143 / 130 (SystemExit); a second Ctrl-C does not wait for the clean-up
    with stop_signals("scatter-pop run"):
        ds = run.run()
    reasons = ds["end_reason"]
    words = ", ".join(
        f"{w} {int((reasons.values == v).sum())}"
        for v, w in zip(reasons.attrs["flag_values"], reasons.attrs["flag_meanings"].split())
        if (reasons.values == v).any()
    )
    print(f"done: {ds.sizes['system']} systems in {run.out / 'ensemble.nc'} (end reasons: {words})")
    return 0
