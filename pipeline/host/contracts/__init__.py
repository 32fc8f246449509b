"""Checks a component against its stage's contract (``radwalk check-plugin TARGET``, and your own tests).

Each check is a small public function ``check_<...>(component) -> CheckRow``
(None when it is not reached because an earlier evaluation failed), grouped
per stage in :data:`CHECKS`.  Run them all on a component with
:func:`check_component`, on every component of a plugin file, module or
component name with :func:`check_target`, or as parametrised test cases in
a plugin's own test suite with :func:`contract_cases`::

    @pytest.mark.parametrize("case", contract_cases("my_plugin.py"), ids=str)
    def test_contract(case):
        case.run()

A failed row names the first bad point and the value found there.

Every component
    ``configure`` (only when options are given), ``declarations`` (name and
    description), ``params`` (every Param with a unit, finite bounds, a
    default inside them and a description), ``signature`` (the stage
    method's keyword arguments, and the names it reads from ``**params``,
    are the declared parameters: :mod:`.signature`), ``options`` (only when
    it declares some), ``validity`` (a Validity whose stated ranges make sense).
Opacity laws, on a grid of log rho x log T over the law's declared validity (:mod:`.opacity`)
    ``call``, ``shape`` (``kappa(rho [n, g], T [n, g], X [n, 1], Z [n, 1],
    **params [n, 1])`` runs and returns [n, g]), ``finite``, ``positive``,
    ``broadcasting`` (row-by-row calls with scalar X, Z and a scalar call
    agree with the [n, g] call), ``warnings`` (none inside the law's own
    range), ``smoothness`` (no factor above :data:`JUMP_FACTOR` between grid
    neighbours), ``units`` (where the gas is hot, ionised and not degenerate,
    no value far below the electron-scattering floor 0.2(1+X) cm^2/g: a law
    in m^2/kg is 10 times too low), ``star`` (finite and > 0 in every layer
    of solved stars of the default model, outside the stated range too:
    :mod:`.layers`), ``speed`` (at most :data:`SLOW_LIMIT` s per million points).
Profiles, for three masses over the stated range (:mod:`.profile`)
    ``call``, ``shape`` ([n, ngrid]), ``finite``, ``physical`` (r and m rise
    to R and M; rho, P, T >= 0; 0 < beta <= 1), ``broadcasting``, ``warnings``,
    ``support`` (only when it declares one, :mod:`.support`).
Relations, with the default opacity law (:mod:`.relation`)
    ``call``, ``shape`` (R and L [n]), ``finite`` (and positive), ``broadcasting``, ``warnings``,
    ``support`` (only when it declares one: a bool [n] that holds at the default parameters).
Likelihoods, around the observed Sun (:mod:`.likelihood`)
    ``call``, ``shape`` ([n]), ``values`` (never NaN, highest at the
    observation), ``broadcasting``, ``warnings``.

Everywhere, ``broadcasting`` means that a call on n samples equals n calls on one.
"""

from radwalk.host.contracts.cases import ContractCase, ContractFailure, contract_cases
from radwalk.host.contracts.checks import CHECKS, checks_for
from radwalk.host.contracts.common import (
    check_configure,
    check_declarations,
    check_options,
    check_params,
    check_validity,
)
from radwalk.host.contracts.inputs import DEFAULT_RANGES
from radwalk.host.contracts.likelihood import (
    check_likelihood_broadcasting,
    check_likelihood_call,
    check_likelihood_inputs,
    check_likelihood_shape,
    check_likelihood_values,
    check_likelihood_warnings,
)
from radwalk.host.contracts.opacity import (
    FLOOR_FRACTION,
    JUMP_FACTOR,
    LOOP_RTOL,
    MAX_GRID_POINTS,
    MAX_STEP_DEX,
    SLOW_LIMIT,
    check_opacity_broadcasting,
    check_opacity_call,
    check_opacity_finite,
    check_opacity_inputs,
    check_opacity_positive,
    check_opacity_shape,
    check_opacity_smoothness,
    check_opacity_speed,
    check_opacity_star,
    check_opacity_units,
    check_opacity_warnings,
)
from radwalk.host.contracts.outcome import CheckReport, CheckRow
from radwalk.host.contracts.profile import (
    check_profile_broadcasting,
    check_profile_call,
    check_profile_finite,
    check_profile_inputs,
    check_profile_physical,
    check_profile_shape,
    check_profile_support,
    check_profile_warnings,
)
from radwalk.host.contracts.relation import (
    check_relation_broadcasting,
    check_relation_call,
    check_relation_finite,
    check_relation_inputs,
    check_relation_shape,
    check_relation_support,
    check_relation_warnings,
)
from radwalk.host.contracts.signature import check_signature
from radwalk.host.contracts.subject import Check, Subject
from radwalk.host.contracts.targets import check_component, check_target, resolve_target

__all__ = [
    # running the contract
    "check_component", "check_target", "resolve_target", "contract_cases",
    # what comes back
    "CheckReport", "CheckRow", "ContractCase", "ContractFailure",
    # the checks, grouped per stage
    "CHECKS", "checks_for", "Check", "Subject",
    "check_configure", "check_declarations", "check_params", "check_signature", "check_options", "check_validity",
    "check_opacity_call", "check_opacity_shape", "check_opacity_finite", "check_opacity_positive",
    "check_opacity_broadcasting", "check_opacity_warnings", "check_opacity_smoothness", "check_opacity_units",
    "check_opacity_star", "check_opacity_speed",
    "check_opacity_inputs", "check_profile_inputs", "check_relation_inputs", "check_likelihood_inputs",
    "check_profile_call", "check_profile_shape", "check_profile_finite", "check_profile_physical",
    "check_profile_broadcasting", "check_profile_warnings", "check_profile_support",
    "check_relation_call", "check_relation_shape", "check_relation_finite", "check_relation_broadcasting",
    "check_relation_warnings", "check_relation_support",
    "check_likelihood_call", "check_likelihood_shape", "check_likelihood_values", "check_likelihood_broadcasting",
    "check_likelihood_warnings",
    # limits and ranges
    "DEFAULT_RANGES", "JUMP_FACTOR", "SLOW_LIMIT", "MAX_STEP_DEX", "MAX_GRID_POINTS", "LOOP_RTOL",
    "FLOOR_FRACTION",
]
