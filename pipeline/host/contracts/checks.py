"""Which checks make up each stage's contract, in report order.

The common checks come first, then the stage's own; every stage of the stage
table must have its group here.
"""

from __future__ import annotations

import radwalk.host.contracts.common as common
import radwalk.host.contracts.likelihood as likelihood
import radwalk.host.contracts.opacity as opacity
import radwalk.host.contracts.profile as profile
import radwalk.host.contracts.relation as relation
from radwalk.errors import ConfigError
from radwalk.host.contracts.subject import Check
from radwalk.host.registry import suggest
from radwalk.host.stages import STAGES, stage

_GROUPS = {m.STAGE: m.CHECKS for m in (profile, opacity, relation, likelihood)}
if set(_GROUPS) != set(STAGES):  # a stage added to the table needs its contract written
    raise ImportError(f"contract checks are written for stages {sorted(_GROUPS)}, but the stages are {STAGES}")

CHECKS: dict[str, tuple[Check, ...]] = {name: common.CHECKS + _GROUPS[name] for name in STAGES}


def checks_for(stage_name: str, names=None) -> tuple[Check, ...]:
    """The checks of a stage's contract, all of them or the ones named.

    Parameters
    ----------
    stage_name : str
    names : iterable of str, optional
        Check names (e.g. ``("call", "finite")``), kept in report order.

    Raises
    ------
    ConfigError
        For an unknown stage or check name.
    """
    group = CHECKS[stage(stage_name).name]
    if names is None:
        return group
    names = tuple(names)
    known = [c.name for c in group]
    for name in names:
        if name not in known:
            raise ConfigError(f"no {stage_name} check {name!r}{suggest(name, known)}; checks: {', '.join(known)}")
    return tuple(c for c in group if c.name in names)
