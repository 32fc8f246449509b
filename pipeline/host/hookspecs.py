"""Every hook radwalk calls, in one place.

A plugin is a module (or object) with functions marked ``@hookimpl`` and
named after the specs below.  There is one provider hook per stage; which
hook feeds which stage, and the method its components must have, is in the
stage table :data:`radwalk.host.stages.STAGE_TABLE`.  Provider hooks are
*collected*: each plugin returns a list of components and the host gathers
all of them; a component name that appears twice within a stage is an error.
A hook name that matches no spec (a misspelling) is rejected when the plugin
is registered.

Components are objects following the protocols in :mod:`radwalk.host.components`:
they carry ``name``, ``description``, ``params`` (tuple of
:class:`radwalk.host.params.Param`) and ``validity``
(:class:`radwalk.host.params.Validity`).  Arrays are numpy floats in cgs units
with a leading sample axis ``n``.

Any component may also declare a joint support, ``support(M, X, Z, **params)
-> bool [n]`` (M in g; its own parameters; ``opacity=`` when it takes that
keyword): the region of the star's and its parameters' values where its model
exists and its prior is non-zero, such as an age no greater than the
main-sequence lifetime of the mass.  The posterior is -inf outside it, prior
draws stay inside it, and ``radwalk check-plugin`` checks it (bool [n], True
at the default parameters).  The other optional methods (a joint prior term
``log_prior_density``, X from Z ``hydrogen_fraction``, a profile's
``quantities`` and ``band_samples``, a relation's ``unreachable_note``) are
described in :class:`radwalk.host.components.Component`.
"""

import pluggy

PROJECT = "radwalk"
hookspec = pluggy.HookspecMarker(PROJECT)
hookimpl = pluggy.HookimplMarker(PROJECT)


@hookspec
def radwalk_profiles():
    """Profile models this plugin provides (collected).

    Returns
    -------
    list of ProfileModel
        Each answers ``profile(M, R, X, Z, **params) -> Profile`` with
        M [n] in g, R [n] in cm, X, Z [n], parameters [n]; the Profile's
        r, m, rho, P, T, beta arrays have shape [n, ngrid] in cm, g, g/cm^3,
        dyn/cm^2, K and dimensionless, centre first.  A profile whose method
        takes an ``opacity`` keyword receives the bound opacity stage
        (``kappa(rho, T, X, Z)``, cm^2/g) — a model that solves the structure
        needs it.  A component with ``sets_radius = True`` solves for its own
        radius and luminosity (Profile.R and Profile.L), which then replace
        the relation's; it may ignore the R it is given.
    """


@hookspec
def radwalk_opacities():
    """Opacity laws this plugin provides (collected).

    Returns
    -------
    list of OpacityLaw
        Each answers ``kappa(rho, T, X, Z, **params)`` with rho in g/cm^3 and
        T in K of any broadcastable shapes (a leading sample axis first); the
        result is the Rosseland-mean opacity in cm^2/g, finite and positive,
        with the broadcast shape of the inputs.
    """


@hookspec
def radwalk_relations():
    """Mass-radius-luminosity relations this plugin provides (collected).

    Returns
    -------
    list of Relation
        Each answers ``predict(M, X, Z, opacity, **params) -> (R, L)`` with
        M [n] in g, X, Z [n], ``opacity`` a callable ``kappa(rho, T, X, Z)``
        in cm^2/g; R [n] in cm and L [n] in erg/s.
    """


@hookspec
def radwalk_likelihoods():
    """Likelihoods this plugin provides (collected).

    Returns
    -------
    list of Likelihood
        Each answers ``loglike(predicted, observed, **params) -> [n]`` where
        ``predicted`` maps "radius" (cm), "luminosity" (erg/s) and "teff" (K)
        to [n] arrays and ``observed`` is a :class:`radwalk.host.components.Observations`;
        unmeasured observables (NaN) are skipped.  Never NaN: -inf for
        impossible predictions.
    """


@hookspec
def radwalk_derived_quantities(profile, opacity, quantities):
    """Adds derived quantities after the built-in transport ones (collected).

    Parameters
    ----------
    profile : Profile
        The structure of the n samples.
    opacity : callable
        ``kappa(rho, T, X, Z)`` in cm^2/g with its parameters bound.
    quantities : dict
        The built-in quantities so far, name -> [n] array (see
        :data:`radwalk.forward.quantities.CATALOGUE` for names and units).

    Returns
    -------
    dict
        name -> (values [n], unit string, description); names must not clash
        with existing ones.
    """
