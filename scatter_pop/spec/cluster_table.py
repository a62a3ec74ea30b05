"""The ``[cluster]`` table: checked once into a frozen :class:`ClusterConfig`.

Also the walltime arithmetic of batch jobs: parsing ``[D-]HH:MM:SS``, the worker lifetime that
retires workers before the batch system kills them, and the check of the walltime against the
longest expected task.  Starting the cluster is :mod:`scatter_pop.ensemble.cluster`'s job.
"""

from __future__ import annotations

import re
import tomllib
import warnings
from dataclasses import asdict, dataclass, replace
from pathlib import Path

from scatter_pop.errors import InputError
from scatter_pop.spec.keys import toml_repr, unknown_key

__all__ = [
    "ClusterConfig",
    "KINDS",
    "BATCH",
    "WalltimeWarning",
    "load_cluster_file",
    "apply_overrides",
    "toml_repr",
    "walltime_seconds",
    "worker_lifetime",
    "check_walltime",
]

KINDS = ("local", "slurm", "pbs", "address")
BATCH = ("slurm", "pbs")


class WalltimeWarning(UserWarning):
    """The walltime holds the longest expected batch, but a retiring worker may lose much work."""


def walltime_seconds(text: str) -> int | None:
    """Seconds in a walltime ``"[D-]HH:MM:SS"`` (s); None unless well formed and >= 120 s."""
    m = re.fullmatch(r"(?:(\d+)-)?(\d+):([0-5]\d):([0-5]\d)", text.strip())
    if m is None or (m.group(1) is not None and int(m.group(2)) >= 24):
        return None
    days, hours, minutes, seconds = (int(g or 0) for g in m.groups())
    total = ((days * 24 + hours) * 60 + minutes) * 60 + seconds
    return total if total >= 120 else None


def worker_lifetime(walltime: float) -> tuple[float, float]:
    """Worker ``--lifetime`` and ``--lifetime-stagger`` (s) for a job walltime (s).

    A worker retires after lifetime ± stagger (uniform), counted from its start.  The stagger
    (5 % of the walltime, at most 5 min) keeps a job's workers from retiring together; the
    margin (2 % of the walltime, at least 1 min) covers the worker's start-up inside the job
    and its graceful shutdown, so the latest retirement still precedes the batch system's kill.
    dask-jobqueue's documentation shows the same pattern (1 h walltime: 55 min ± 4 min).
    """
    stagger = min(0.05 * walltime, 300.0)
    margin = max(60.0, 0.02 * walltime)
    return walltime - margin - stagger, stagger


def _usable(walltime: float) -> float:
    lifetime, stagger = worker_lifetime(walltime)
    return lifetime - stagger  # earliest retirement, s


def _hms(seconds: float) -> str:
    s = int(-(-seconds // 60) * 60)  # rounded up to a whole minute
    return f"{s // 3600:02d}:{s % 3600 // 60:02d}:00"


def check_walltime(walltime: str, longest_task_seconds: float | None) -> None:
    """Refuse a walltime that cannot hold the longest task; warn when it holds < 4 of them.

    A retiring worker interrupts its running task, which then restarts elsewhere and counts as
    one failure (at most ``ALLOWED_FAILURES``).  A task longer than the earliest retirement can
    never finish; one started at a random moment of a worker's life is interrupted with a
    probability of about (task time) / (lifetime), so beyond a quarter of it the walltime is tight.
    """
    if not longest_task_seconds or longest_task_seconds <= 0:
        return
    from scipy.optimize import brentq

    usable, task = _usable(walltime_seconds(walltime)), float(longest_task_seconds)
    if task <= 0.25 * usable:
        return
    advised = _hms(brentq(lambda w: _usable(w) - 4 * task, 120, 1e9))
    if task >= usable:
        least = _hms(brentq(lambda w: _usable(w) - task, 120, 1e9))
        raise InputError(
            f"cluster.walltime = {toml_repr(walltime)}: too short for the longest expected "
            f"batch (about {task:.0f} s; workers retire {usable:.0f} s after they "
            f"start); allowed: at least {least}, {advised} or more advised"
        )
    warnings.warn(
        f"cluster.walltime = {toml_repr(walltime)}: workers retire after {usable:.0f} s, "
        f"only {usable / task:.1f} times the longest expected batch ({task:.0f} s); "
        f"each retirement interrupts a batch, so a walltime of {advised} or more is "
        "advised",
        WalltimeWarning,
        stacklevel=3,
    )


@dataclass(frozen=True)
class ClusterConfig:
    """The ``[cluster]`` table, checked; see the README section "Running on a cluster".

    Parameters
    ----------
    kind : str
        ``"local"`` (default), ``"slurm"``, ``"pbs"`` or ``"address"``.
    workers : int or None
        local: worker processes (one thread each); None = the cores available to this process.
    address : str or None
        address: ``"tcp://host:port"`` (or ``"host:port"``) of a running scheduler, or the path
        of a scheduler file (``*.json``, as written by ``dask-mpi --scheduler-file``).
    queue, account : str or None
        slurm/pbs: partition or queue (``-p``/``-q``) and account (``-A``) of the worker jobs.
    cores : int
        slurm/pbs: cores per job; each runs one single-threaded worker process.
    memory : str
        slurm/pbs: memory per job, e.g. ``"8GB"`` (bytes; shared by the job's workers).
    walltime : str
        slurm/pbs: wall-time limit per job, ``"[D-]HH:MM:SS"`` (time).
    jobs, minimum_jobs, maximum_jobs : int or None
        slurm/pbs: keep ``jobs`` jobs running (lost ones replaced), or adapt between
        ``minimum_jobs`` and ``maximum_jobs`` to the work queued.
    job_script_prologue, job_extra_directives : tuple of str
        slurm/pbs: shell lines run before the worker (modules, environment), and extra
        ``#SBATCH``/``#PBS`` directives (e.g. ``"--qos=long"``).
    resource_spec : str or None
        pbs: the ``-l`` resource request; None = ``select=1:ncpus=<cores>:mem=<memory>``.
    interface : str or None
        slurm/pbs: network interface that scheduler and workers use (``"ib0"``, ``"eth0"``).
    log_directory, local_directory : str or None
        slurm/pbs: folder of the jobs' stdout/stderr; all kinds with workers: scratch folder.
    python : str or None
        slurm/pbs: Python interpreter on the compute nodes; None = the driver's interpreter.
    dashboard_port : int
        local/slurm/pbs: port of the Dask dashboard (0 = any free port).
    """

    kind: str = "local"
    workers: int | None = None
    address: str | None = None
    queue: str | None = None
    account: str | None = None
    cores: int = 1
    memory: str | None = None
    walltime: str = "24:00:00"
    jobs: int | None = None
    minimum_jobs: int | None = None
    maximum_jobs: int | None = None
    job_script_prologue: tuple[str, ...] = ()
    job_extra_directives: tuple[str, ...] = ()
    resource_spec: str | None = None
    interface: str | None = None
    log_directory: str | None = None
    local_directory: str | None = None
    python: str | None = None
    dashboard_port: int = 8787

    @classmethod
    def from_table(cls, table: dict, where: str = "cluster") -> ClusterConfig:
        """Check a ``[cluster]`` table and resolve its defaults; errors name ``<where>.<key>``."""
        if not isinstance(table, dict):
            raise InputError(f"{where} = {toml_repr(table)}: must be a table")
        kind = table.get("kind", "local")
        if kind not in KINDS:
            raise InputError(f"{where}.kind = {toml_repr(kind)}: allowed: {', '.join(KINDS)}")
        values = {"kind": kind}
        for key, value in table.items():
            if key == "kind":
                continue
            if key not in _KEYS:
                raise unknown_key(where, key, value, ("kind", *_KEYS))
            check, kinds, allowed = _KEYS[key]
            if kind not in kinds:
                raise InputError(
                    f"{where}.{key} = {toml_repr(value)}: applies only to kind "
                    f"{' or '.join(kinds)}, but kind = {toml_repr(kind)}"
                )
            ok, value = check(value)
            if not ok:
                raise InputError(f"{where}.{key} = {toml_repr(table[key])}: allowed: {allowed}")
            values[key] = value
        return _resolve(cls(**values), where)

    def to_table(self) -> dict:
        """The keys that apply to this kind, as a TOML-ready table (inverse of from_table)."""
        out = {"kind": self.kind}
        for key, value in asdict(self).items():
            if key in _KEYS and self.kind in _KEYS[key][1] and value is not None:
                out[key] = list(value) if isinstance(value, tuple) else value
        return out


def _int(low):
    return lambda v: (isinstance(v, int) and not isinstance(v, bool) and v >= low, v)


def _text(v):
    return isinstance(v, str) and v.strip() != "" and "\n" not in v, v


def _lines(v):
    ok = isinstance(v, list) and all(isinstance(x, str) and "\n" not in x for x in v)
    return ok, tuple(v) if ok else v


def _memory(v):
    from dask.utils import parse_bytes

    try:
        return isinstance(v, str) and parse_bytes(v) >= 2**27, v
    except ValueError:
        return False, v


def _walltime(v):
    return isinstance(v, str) and walltime_seconds(v) is not None, v


def _address(v):
    ok = isinstance(v, str) and (
        v.endswith(".json") or re.fullmatch(r"(?:[a-z]+://)?\[?[\w.\-:]+\]?:\d{1,5}", v) is not None
    )
    return ok, v


_ALL = ("local", "slurm", "pbs")
# key -> (check returning (ok, converted value), kinds it applies to, what is allowed)
_KEYS = {
    "workers": (_int(1), ("local",), "an integer >= 1 (worker processes)"),
    "address": (_address, ("address",), 'a scheduler address "tcp://host:port" or a scheduler file "*.json"'),
    "queue": (_text, BATCH, "a partition / queue name"),
    "account": (_text, BATCH, "an account name"),
    "cores": (_int(1), BATCH, "an integer >= 1 (cores per job)"),
    "memory": (_memory, BATCH, 'a memory per job such as "8GB" or "3.5GiB" (at least 128 MiB)'),
    "walltime": (_walltime, BATCH, 'a duration "HH:MM:SS" or "D-HH:MM:SS" of at least 00:02:00'),
    "jobs": (_int(1), BATCH, "an integer >= 1 (worker jobs kept running)"),
    "minimum_jobs": (_int(0), BATCH, "an integer >= 0"),
    "maximum_jobs": (_int(1), BATCH, "an integer >= 1"),
    "job_script_prologue": (_lines, BATCH, "a list of single-line strings (shell commands)"),
    "job_extra_directives": (_lines, BATCH, 'a list of single-line strings such as "--qos=long"'),
    "resource_spec": (_text, ("pbs",), 'a PBS resource request such as "select=1:ncpus=8:mem=16GB"'),
    "interface": (_text, BATCH, 'a network interface name such as "ib0"'),
    "log_directory": (_text, BATCH, "a folder path"),
    "local_directory": (_text, _ALL, "a folder path"),
    "python": (_text, BATCH, "the path of a Python interpreter on the compute nodes"),
    "dashboard_port": (_int(0), _ALL, "a port number 0 ... 65535 (0 = any free port)"),
}


def _resolve(c: ClusterConfig, where: str) -> ClusterConfig:
    """Cross-key checks and defaults resolved at load time."""
    if c.dashboard_port > 65535:
        raise InputError(f"{where}.dashboard_port = {c.dashboard_port}: allowed: 0 ... 65535")
    if c.kind == "address" and c.address is None:
        raise InputError(
            f'{where}.address: missing; required when kind = "address" (e.g. "tcp://10.0.0.1:8786" or "scheduler.json")'
        )
    if c.kind not in BATCH:
        return c
    if c.jobs is not None and (c.minimum_jobs is not None or c.maximum_jobs is not None):
        raise InputError(f"{where}.jobs = {c.jobs}: give either jobs or minimum_jobs/maximum_jobs, not both")
    if c.jobs is not None or (c.minimum_jobs is None and c.maximum_jobs is None):
        n = c.jobs or 1
        c = replace(c, jobs=None, minimum_jobs=n, maximum_jobs=n)
    else:
        low = c.minimum_jobs if c.minimum_jobs is not None else min(1, c.maximum_jobs)
        high = c.maximum_jobs if c.maximum_jobs is not None else max(low, 1)
        if high < low:
            raise InputError(f"{where}.maximum_jobs = {high}: allowed: an integer >= minimum_jobs ({low})")
        c = replace(c, minimum_jobs=low, maximum_jobs=high)
    if c.memory is None:
        c = replace(c, memory=f"{2 * c.cores}GiB")
    return c


def load_cluster_file(path) -> ClusterConfig:
    """Read a cluster file: a TOML file whose top level is the ``[cluster]`` table."""
    path = Path(path)
    try:
        table = tomllib.loads(path.read_bytes().decode("utf-8-sig"))
    except OSError as exc:
        raise InputError(f"cluster file {toml_repr(str(path))}: cannot read ({exc.strerror})") from None
    except UnicodeDecodeError as exc:
        raise InputError(
            f"cluster file {toml_repr(str(path))}: byte {exc.start} is not UTF-8; save the file as UTF-8"
        ) from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML: {exc}") from None
    if set(table) == {"cluster"} and isinstance(table["cluster"], dict):
        table = table["cluster"]  # a file written as [cluster] ... is accepted too
    return ClusterConfig.from_table(table, where=f"{path.name}: cluster")


def apply_overrides(config: ClusterConfig, workers: int | None = None, scheduler: str | None = None) -> ClusterConfig:
    """The config after the ``workers`` and ``scheduler`` overrides (InputError names them)."""
    if scheduler is not None:
        ok, _ = _address(scheduler)
        if not ok:
            raise InputError(
                f"scheduler = {toml_repr(scheduler)}: allowed: " + _KEYS["address"][2], arguments=("scheduler",)
            )
        return ClusterConfig(kind="address", address=scheduler)
    if workers is None:
        return config
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise InputError(f"workers = {toml_repr(workers)}: allowed: an integer >= 1", arguments=("workers",))
    if config.kind == "local":
        return replace(config, workers=workers)
    if config.kind in BATCH:  # N worker processes = ceil(N / cores) jobs, kept running
        n = -(-workers // config.cores)
        return replace(config, minimum_jobs=n, maximum_jobs=n)
    raise InputError(
        f"workers = {workers}: applies to kind local, slurm or pbs; an existing "
        'scheduler (kind = "address") has the workers it has',
        arguments=("workers",),
    )
