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
        "--progress-every",
        default="10",
        metavar="SECONDS",
        help="seconds between progress lines in a log (default 10; a terminal shows a bar)",
    )


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
