"""Steady-state solutions of the three stages: duty, mode, D2 and component waveforms.

Each topology module offers ``steady_state(...)`` with the same keyword arguments and returns a
:class:`~lossbudget.topologies.common.SteadyState`; :data:`STAGES` maps the design's topology
name to it.
"""

from lossbudget.topologies import boost, buck, buck_boost
from lossbudget.topologies.common import SteadyState

STAGES = {
    "boost": boost.steady_state,
    "buck": buck.steady_state,
    "buck-boost": buck_boost.steady_state,
}

__all__ = ["STAGES", "SteadyState"]
