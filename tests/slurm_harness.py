"""A real single-node SLURM for the tests of the HPC path (helper module, not a test file).

The harness follows the set-up measured on these machines
(``../shared/notes/dask-and-slurm.md`` and ``slurm.conf.example`` beside it):

1. install the Debian packages ``slurm-wlm munge slurm-client slurm-wlm-torque`` with apt-get
   unless their programs are already present (``apt-get update`` first only if the install fails);
2. write ``/etc/slurm/slurm.conf`` for one node named ``hostname -s`` with the CPUs and RealMemory
   that ``slurmd -C`` reports, partition ``debug``;
3. start ``munged``, ``slurmctld -D -c`` and ``slurmd -D`` as child processes (no systemd in CI),
   record their PIDs, and wait until the node is ``idle``;
4. at the end cancel every job, stop the three daemons by PID and remove the slurm.conf it wrote.

Test modules use the fixture :func:`slurm` (``from slurm_harness import slurm``).  Pytest makes one
fixture instance per importing module, so the daemons themselves are a reference-counted singleton:
started by the first user, stopped after the last one.  A lock file serialises test sessions that
run at the same time on one machine.

If SLURM cannot be installed or started, the fixture FAILS when the environment variable ``CI``
is set; without ``CI`` (a developer's machine that is not root, say) it skips with the reason.
"""

from __future__ import annotations

import fcntl
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

__all__ = ["HarnessError", "SlurmHarness", "slurm", "squeue_jobs", "wait_for_no_jobs", "PARTITION", "ensure_installed"]

PACKAGES = ("slurm-wlm", "munge", "slurm-client", "slurm-wlm-torque")
PROGRAMS = ("munged", "slurmctld", "slurmd", "sbatch", "squeue", "scancel", "sinfo", "qsub", "qstat", "qdel")
SBIN = ("/usr/sbin", "/usr/bin", "/sbin", "/bin")
CONF_PATH = Path("/etc/slurm/slurm.conf")
MARKER = "# written by scatter_pop tests/slurm_harness.py; removed when the tests end"
PARTITION = "debug"
STATE_DIR = Path(tempfile.gettempdir()) / "scatter_pop-slurm-harness"
LOCK_WAIT_SECONDS = 900.0


class HarnessError(RuntimeError):
    """SLURM could not be installed, configured or started."""


def _which(program: str) -> str | None:
    path = os.pathsep.join([os.environ.get("PATH", ""), *SBIN])
    return shutil.which(program, path=path)


def _run(cmd: list[str], timeout: float = 60.0, check: bool = True) -> subprocess.CompletedProcess:
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout)
    if check and proc.returncode != 0:
        tail = " | ".join((proc.stderr or proc.stdout).strip().splitlines()[-3:])
        raise HarnessError(f"`{' '.join(cmd)}` exited with {proc.returncode}: {tail}")
    return proc


def ensure_installed() -> None:
    """Install the SLURM, munge and Torque-wrapper packages unless their programs exist."""
    missing = [p for p in PROGRAMS if _which(p) is None]
    if not missing:
        return
    if os.geteuid() != 0:
        raise HarnessError(
            f"SLURM programs missing ({', '.join(missing)}) and not root, "
            "so cannot apt-get install " + " ".join(PACKAGES)
        )
    if _which("apt-get") is None:
        raise HarnessError("SLURM programs missing and there is no apt-get to install them")
    env = dict(os.environ, DEBIAN_FRONTEND="noninteractive")
    install = ["apt-get", "install", "-y", "--no-install-recommends", *PACKAGES]
    proc = subprocess.run(install, capture_output=True, text=True, timeout=600, env=env)
    if proc.returncode != 0:  # usually no package lists yet: update once and retry
        subprocess.run(["apt-get", "update"], capture_output=True, text=True, timeout=600, env=env)
        proc = subprocess.run(install, capture_output=True, text=True, timeout=600, env=env)
    if proc.returncode != 0:
        tail = " | ".join(proc.stderr.strip().splitlines()[-3:])
        raise HarnessError(
            f"SLURM cannot be installed (apt-get install {' '.join(PACKAGES)} exited with {proc.returncode}): {tail}"
        )
    missing = [p for p in PROGRAMS if _which(p) is None]
    if missing:
        raise HarnessError(f"installed {' '.join(PACKAGES)} but {', '.join(missing)} not found")


def node_resources() -> tuple[str, int, int]:
    """(node name, CPUs, RealMemory in MB) as ``slurmd -C`` reports them for this machine."""
    out = _run([_which("slurmd") or "slurmd", "-C"]).stdout
    fields = dict(re.findall(r"(\w+)=(\S+)", out))
    try:
        return fields["NodeName"], int(fields["CPUs"]), int(fields["RealMemory"])
    except (KeyError, ValueError) as exc:
        raise HarnessError(f"cannot read CPUs/RealMemory from `slurmd -C`: {out!r}") from exc


def slurm_conf(host: str, cpus: int, real_memory_mb: int) -> str:
    """The single-node slurm.conf of the notes (``slurm.conf.example``) for this host."""
    return f"""{MARKER}
ClusterName=localcluster
SlurmctldHost={host}(127.0.0.1)
SlurmUser=slurm
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
SchedulerType=sched/backfill
MpiDefault=none
ReturnToService=2
StateSaveLocation=/var/spool/slurmctld
SlurmdSpoolDir=/var/spool/slurmd
SlurmctldPidFile=/run/slurmctld.pid
SlurmdPidFile=/run/slurmd.pid
SlurmctldLogFile=/var/log/slurm/slurmctld.log
SlurmdLogFile=/var/log/slurm/slurmd.log
SlurmctldPort=6817
SlurmdPort=6818
NodeName={host} NodeAddr=127.0.0.1 CPUs={cpus} RealMemory={real_memory_mb} State=UNKNOWN
PartitionName={PARTITION} Nodes={host} Default=YES MaxTime=INFINITE State=UP
MailProg=/bin/true
"""


def _process_name(pid: int) -> str | None:
    """The command name of a live process ``pid``; None if gone or a zombie."""
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    name = stat[stat.index("(") + 1 : stat.rindex(")")]
    state = stat[stat.rindex(")") + 2 :].split()[0]
    return None if state in ("Z", "X") else name


def _running(name: str) -> list[int]:
    pids = []
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit() and _process_name(int(entry.name)) == name:
            pids.append(int(entry.name))
    return pids


def _stop_pid(pid: int, name: str, timeout: float = 10.0) -> None:
    """SIGTERM the process ``pid`` if it is still ``name``; SIGKILL after ``timeout`` s."""
    if _process_name(pid) != name:
        return
    os.kill(pid, signal.SIGTERM)
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if _process_name(pid) != name:
            return
        time.sleep(0.1)
    os.kill(pid, signal.SIGKILL)


def squeue_jobs() -> list[tuple[str, str, str]]:
    """(job id, job name, state) of every job SLURM knows about."""
    out = _run([_which("squeue") or "squeue", "-h", "-o", "%i|%j|%T"], timeout=20).stdout
    return [tuple(line.split("|")) for line in out.splitlines() if line.strip()]


def wait_for_no_jobs(timeout: float = 20.0) -> list[tuple[str, str, str]]:
    """Poll ``squeue`` until it lists no job; return what is left after ``timeout`` s."""
    deadline = time.monotonic() + timeout
    jobs = squeue_jobs()
    while jobs and time.monotonic() < deadline:
        time.sleep(0.25)
        jobs = squeue_jobs()
    return jobs


class SlurmHarness:
    """Start and stop munged, slurmctld and slurmd of a one-node SLURM on this machine."""

    def __init__(self, workdir: Path):
        self.workdir = Path(workdir)
        self.procs: dict[str, subprocess.Popen] = {}
        self.host = ""
        self.cpus = 0
        self._lock = None

    # -- set-up ---------------------------------------------------------------------------
    def start(self, timeout: float = 60.0) -> SlurmHarness:
        if os.geteuid() != 0:
            raise HarnessError("starting SLURM daemons needs root")
        ensure_installed()
        self._acquire_lock()
        try:
            self._stop_stale()
            self._write_conf()
            self._start_munged()
            self._start_slurm_daemons()
            self._wait_idle(timeout)
        except BaseException:
            self.stop()
            raise
        return self

    def _acquire_lock(self) -> None:
        STATE_DIR.mkdir(parents=True, exist_ok=True)
        self._lock = open(STATE_DIR / "lock", "w")
        deadline = time.monotonic() + LOCK_WAIT_SECONDS
        while True:
            try:
                fcntl.flock(self._lock, fcntl.LOCK_EX | fcntl.LOCK_NB)
                return
            except BlockingIOError:
                if time.monotonic() > deadline:
                    raise HarnessError(
                        "another test session holds the SLURM harness lock "
                        f"({STATE_DIR / 'lock'}) for more than "
                        f"{LOCK_WAIT_SECONDS:.0f} s"
                    ) from None
                time.sleep(1.0)

    def _stop_stale(self) -> None:
        """Stop daemons a crashed earlier session of this harness left (PIDs it recorded)."""
        pidfile = STATE_DIR / "pids"
        if pidfile.exists():
            for line in pidfile.read_text().splitlines():
                name, _, pid = line.partition(" ")
                if pid.isdigit():
                    _stop_pid(int(pid), name)
            pidfile.unlink()
        for name in ("slurmctld", "slurmd", "munged"):
            pids = _running(name)
            if pids:
                raise HarnessError(
                    f"a {name} not started by this harness is running "
                    f"(pid {pids[0]}); stop it before running the SLURM tests"
                )

    def _write_conf(self) -> None:
        if CONF_PATH.exists() and MARKER not in CONF_PATH.read_text():
            raise HarnessError(
                f"{CONF_PATH} exists and was not written by this harness; "
                "refusing to overwrite a real SLURM configuration"
            )
        self.host = socket.gethostname().split(".")[0]
        node, self.cpus, memory = node_resources()
        if node != self.host:
            raise HarnessError(
                f"`slurmd -C` names the node {node!r}, `hostname -s` is {self.host!r}; SLURM needs them equal"
            )
        try:
            socket.gethostbyname(self.host)
        except OSError as exc:
            raise HarnessError(f"the host name {self.host!r} does not resolve (add it to /etc/hosts)") from exc
        CONF_PATH.parent.mkdir(parents=True, exist_ok=True)
        CONF_PATH.write_text(slurm_conf(self.host, self.cpus, memory))

    def _spawn(self, name: str, cmd: list[str], **kwargs) -> None:
        out = open(self.workdir / f"{name}.out", "w")
        self.procs[name] = subprocess.Popen(
            cmd, stdout=out, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL, **kwargs
        )
        out.close()
        with open(STATE_DIR / "pids", "a") as f:
            f.write(f"{name} {self.procs[name].pid}\n")

    def _start_munged(self) -> None:
        run_dir = Path("/run/munge")
        run_dir.mkdir(parents=True, exist_ok=True)
        shutil.chown(run_dir, "munge", "munge")
        run_dir.chmod(0o755)
        if not Path("/etc/munge/munge.key").exists():
            _run(["runuser", "-u", "munge", "--", _which("mungekey") or "mungekey", "--create"])
        self._spawn(
            "munged", [_which("munged"), "--foreground", "--force"], user="munge", group="munge", extra_groups=[]
        )
        self._wait(lambda: Path("/run/munge/munge.socket.2").exists(), 10.0, "munged socket")

    def _start_slurm_daemons(self) -> None:
        for d in ("/var/spool/slurmctld", "/var/spool/slurmd", "/var/log/slurm"):
            Path(d).mkdir(parents=True, exist_ok=True)
        for d in ("/var/spool/slurmctld", "/var/log/slurm"):
            shutil.chown(d, "slurm", "slurm")
        # -c: do not recover jobs of an earlier session from the state files
        self._spawn("slurmctld", [_which("slurmctld"), "-D", "-c"])
        self._spawn("slurmd", [_which("slurmd"), "-D"])

    def _wait(self, ready, timeout: float, what: str) -> None:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            for name, proc in self.procs.items():
                if proc.poll() is not None:
                    log = (self.workdir / f"{name}.out").read_text()[-400:]
                    raise HarnessError(f"{name} exited with {proc.returncode}: {log!r}")
            if ready():
                return
            time.sleep(0.2)
        raise HarnessError(f"timed out after {timeout:.0f} s waiting for {what}")

    def _node_state(self) -> str:
        proc = _run([_which("sinfo"), "-h", "-N", "-o", "%T"], timeout=10, check=False)
        return proc.stdout.strip() if proc.returncode == 0 else ""

    def _wait_idle(self, timeout: float) -> None:
        self._wait(lambda: self._node_state().startswith("idle"), timeout, f"node {self.host} to become idle in sinfo")

    # -- tear-down ------------------------------------------------------------------------
    def cancel_all_jobs(self) -> None:
        if "slurmctld" in self.procs and self.procs["slurmctld"].poll() is None:
            _run([_which("scancel"), "--user", "root"], timeout=20, check=False)
            wait_for_no_jobs(20.0)

    def stop(self) -> None:
        """Cancel every job, stop the daemons this harness started (by PID), remove its conf."""
        try:
            self.cancel_all_jobs()
        finally:
            for name in ("slurmd", "slurmctld", "munged"):
                proc = self.procs.pop(name, None)
                if proc is not None and proc.poll() is None:
                    proc.terminate()
                    try:
                        proc.wait(timeout=10)
                    except subprocess.TimeoutExpired:
                        proc.kill()
                        proc.wait(timeout=5)
            (STATE_DIR / "pids").unlink(missing_ok=True)
            if CONF_PATH.exists() and MARKER in CONF_PATH.read_text():
                CONF_PATH.unlink()
            if self._lock is not None:
                fcntl.flock(self._lock, fcntl.LOCK_UN)
                self._lock.close()
                self._lock = None


# -- the fixture (reference-counted singleton) ---------------------------------------------
_shared: dict = {"harness": None, "users": 0, "error": None}


def unavailable(message: str) -> None:
    if os.environ.get("CI"):
        pytest.fail(f"real SLURM unavailable: {message}", pytrace=False)
    pytest.skip(f"real SLURM unavailable (CI unset, so skipping): {message}")


@pytest.fixture(scope="session")
def slurm(tmp_path_factory):
    """A running single-node SLURM (:class:`SlurmHarness`); fails in CI if unavailable."""
    if _shared["error"] is not None:
        unavailable(_shared["error"])
    if _shared["harness"] is None:
        harness = SlurmHarness(tmp_path_factory.mktemp("slurm"))
        try:
            harness.start()
        except (HarnessError, OSError, subprocess.SubprocessError) as exc:
            _shared["error"] = str(exc)
            unavailable(str(exc))
        _shared["harness"] = harness
    _shared["users"] += 1
    try:
        yield _shared["harness"]
    finally:
        _shared["users"] -= 1
        if _shared["users"] == 0 and _shared["harness"] is not None:
            _shared["harness"].stop()
            _shared["harness"] = None


if __name__ == "__main__":  # manual use: python tests/slurm_harness.py (Ctrl-C stops it)
    h = SlurmHarness(Path(tempfile.mkdtemp(prefix="slurm-")))
    signal.signal(signal.SIGTERM, signal.default_int_handler)
    try:
        h.start()
        print(f"SLURM up on {h.host} ({h.cpus} CPUs); logs in {h.workdir}", file=sys.stderr)
        signal.pause()
    except KeyboardInterrupt:
        pass
    finally:
        h.stop()
