"""The ledger of one system's integration, and its checkpoint file.

The ledger holds what the REBOUND simulation itself does not: the fate of
every planet already removed, the energy and angular momentum taken away by
mergers and removals, the first close encounter, the wall time spent and the
chunk counter.  A checkpoint is one file holding the ledger (JSON) and the
REBOUND binary snapshot, written atomically (temporary file, fsync,
``os.replace``), so a killed worker leaves either the old or the new
checkpoint, never half of one.

File layout: the 8-byte magic ``b"SPCKPT01"``, an 8-byte little-endian
length n, n bytes of UTF-8 JSON (the ledger), then the REBOUND binary.
Floats go through JSON as their shortest round-trip repr (exact).
"""

from __future__ import annotations

import json
import math
import os
import struct
from dataclasses import asdict, dataclass, field
from pathlib import Path

from scatter_pop.errors import InputError
from scatter_pop.spec.model import END_KEYS  # a kept state continues to a later end time: not part of its identity

__all__ = [
    "Ledger",
    "FateEntry",
    "write_checkpoint",
    "read_checkpoint",
    "CHECKPOINT_MAGIC",
    "END_ON_CHECK",
    "END_KEYS",
    "without_end_time",
    "checkpoint_identity",
]

CHECKPOINT_MAGIC = b"SPCKPT01"
END_ON_CHECK = 1e-12  # an end time this close (relative) to a chunk boundary counts as on it


def checkpoint_identity(initial, integration, outcomes, **integration_overrides) -> dict:
    """What a checkpoint must match to be continued: the system, its integration settings and outcome
    rules, without the wall-clock cap and the end time (a kept state continues to a larger cap or a
    later end time), as JSON-clean values."""
    identity = {"initial": asdict(initial), "integration": asdict(integration), "outcomes": asdict(outcomes)}
    for key in ("wall_seconds_max", *END_KEYS):
        identity["integration"].pop(key)
    identity["integration"].update(integration_overrides)
    return json.loads(json.dumps(identity))


def without_end_time(identity: dict) -> dict:
    """A checkpoint identity without the end-time keys of its ``integration`` section (taylor
    checkpoints written before 2026-12-02 kept them)."""
    out = dict(identity)
    out["integration"] = {k: v for k, v in identity.get("integration", {}).items() if k not in END_KEYS}
    return out


@dataclass
class FateEntry:
    """A planet's fate and its state at that moment (astrocentric elements; AU, yr, M_sun, rad)."""

    fate: int
    t: float
    merged_into: int
    mass: float
    a: float
    e: float
    inc: float
    omega: float
    node: float
    q: float
    radius: float


@dataclass
class Ledger:
    """Bookkeeping of one system between integration chunks.

    Attributes
    ----------
    chunks_done : int
        Completed integration chunks (chunk k ends at (k+1) * chunk_length).
    e0 : float
        Total energy at t = 0 (M_sun AU^2 yr^-2).
    l0 : list of float
        Total angular momentum vector at t = 0 (M_sun AU^2 yr^-1).
    l_scale : float
        Sum of the bodies' angular-momentum magnitudes at t = 0 (centre-of-mass frame,
        M_sun AU^2 yr^-1): the scale of the relative angular-momentum error (equal to
        |l0| for prograde coplanar orbits, finite when orbits counter-rotate).
    energy_removed : float
        Sum of E_before - E_after over every merger and removal: E(t) + energy_removed
        is conserved by exact dynamics.
    angmom_removed : list of float
        Same for the angular momentum vector.
    t_first_encounter : float
        yr; NaN until the first separation below one mutual Hill radius.
    fates : dict
        Planet name -> FateEntry, for planets no longer in the simulation.
    radius : dict
        Body name -> physical radius (AU); the simulation's own radii are search radii.
    bodies : list of str
        Name of each body in simulation order (star first). The engine keeps this list
        itself and never reads REBOUND's particle names: in rebound 5.2.2 the names of a
        simulation rebuilt from a binary snapshot can change once other simulations in the
        process are freed (seen in Dask workers continuing capped systems).
    wall_seconds : float
        Wall time spent integrating, over all segments (s).
    recent_gaps : list of float
        Osculating gap q_out - Q_in of a bound pair in mutual Hill radii at the last checks
        (at most ``settlement.GAP_CHECKS``; emptied whenever the system is not a bound pair).
    """

    chunks_done: int = 0
    e0: float = math.nan
    l0: list = field(default_factory=lambda: [math.nan] * 3)
    l_scale: float = math.nan
    energy_removed: float = 0.0
    angmom_removed: list = field(default_factory=lambda: [0.0, 0.0, 0.0])
    t_first_encounter: float = math.nan
    fates: dict = field(default_factory=dict)
    radius: dict = field(default_factory=dict)
    bodies: list = field(default_factory=list)
    wall_seconds: float = 0.0
    recent_gaps: list = field(default_factory=list)
    identity: dict = field(default_factory=dict)

    @property
    def encounter_found(self) -> bool:
        return not math.isnan(self.t_first_encounter)

    def book(self, d_energy: float, d_angmom) -> None:
        """Record a jump E_after - E_before = d_energy (and L likewise) made by a merger or removal."""
        self.energy_removed -= float(d_energy)
        self.angmom_removed = [a - float(b) for a, b in zip(self.angmom_removed, d_angmom)]

    def to_json(self) -> str:
        data = asdict(self)
        return json.dumps(data, sort_keys=True, allow_nan=True)

    @classmethod
    def from_json(cls, text: str) -> Ledger:
        data = json.loads(text)
        data["fates"] = {k: FateEntry(**v) for k, v in data["fates"].items()}
        return cls(**data)


def write_checkpoint(path, ledger: Ledger, sim_bytes: bytes) -> None:
    """Write ledger + REBOUND binary to ``path`` atomically.

    Parameters
    ----------
    path : str or Path
        Checkpoint file (its folder is created if missing).
    ledger : Ledger
    sim_bytes : bytes
        REBOUND binary snapshot of the simulation.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    head = ledger.to_json().encode("utf-8")
    tmp = path.with_name(path.name + f".tmp{os.getpid()}")
    with open(tmp, "wb") as fh:
        fh.write(CHECKPOINT_MAGIC)
        fh.write(struct.pack("<Q", len(head)))
        fh.write(head)
        fh.write(sim_bytes)
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, path)
    try:
        dir_fd = os.open(path.parent, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(dir_fd)
    except OSError:
        pass  # some file systems do not support fsync on directories
    finally:
        os.close(dir_fd)


def read_checkpoint(path) -> tuple[Ledger, bytes]:
    """Read a checkpoint written by :func:`write_checkpoint`.

    Raises
    ------
    InputError
        If the file is not a scatter_pop checkpoint.
    """
    data = Path(path).read_bytes()
    if len(data) < 16 or data[:8] != CHECKPOINT_MAGIC:
        raise InputError(
            f"checkpoint {str(path)!r}: not a scatter_pop checkpoint file "
            f"(expected it to start with {CHECKPOINT_MAGIC!r})"
        )
    (n,) = struct.unpack("<Q", data[8:16])
    if 16 + n > len(data):
        raise InputError(f"checkpoint {str(path)!r}: truncated ({len(data)} bytes, header says {16 + n}+)")
    ledger = Ledger.from_json(data[16 : 16 + n].decode("utf-8"))
    return ledger, data[16 + n :]
