"""A spec shared by engine tests: three tightly packed Jupiters with inflated radii.

Three 1 M_J planets from 1 AU, 2.2 mutual Hill radii apart (inside the Gladman 2*sqrt(3) boundary)
with 2 R_J radii, so that they meet and merge within a few tens of years: cheap runs that contain a
merger (checkpoints across a merger, step re-chosen after a merger).  The numbers are set-up choices,
not check values.
"""

from __future__ import annotations

from scatter_pop.spec.reader import parse_spec

__all__ = ["tight_trio_spec"]

_TEMPLATE = """
[run]
seed = 7
systems = 4
[star]
mass = 1.0
[planets]
count = 3
mass = 1.0
a_inner = 1.0
spacing = 2.2
e_sigma = 0.05
inc_sigma = 1.0
radius = 2.0
[integration]
integrator = "{integrator}"
end_time = {end_time}
ejection_distance = 30.0
check_orbits = {check_orbits}
"""


def tight_trio_spec(integrator: str, end_time: float, check_orbits: int):
    """The parsed spec for ``integrator``, integrated to ``end_time`` yr, checked every ``check_orbits``."""
    return parse_spec(_TEMPLATE.format(integrator=integrator, end_time=end_time, check_orbits=check_orbits))
