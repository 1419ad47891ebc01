"""Pure synthesis library: harmonise estimates, pool them, check around the pooled number.

Modules: :mod:`.harmonise` (analysis scale and variance of each estimate), :mod:`.independence`
(one estimate per unit of replication; strata that may be pooled), :mod:`.pooling` (one pooled
estimate), :mod:`.grouped` (many groups at once, vectorised), :mod:`.sensitivity` and
:mod:`.metareg` (τ² interval, leave-one-out, cumulative, subgroups, meta-regression, small-study
effects), :mod:`.multilevel` (estimates within events: three-level REML fit, event-level pooling
and Wald tests; the likelihood and its maximisation in :mod:`.multilevel_reml`) and
:mod:`.robust` (cluster-robust CR0/CR2 variance, Satterthwaite df, HTZ test).
No database, no user interface: numpy arrays, DataFrames and dataclasses in and out.

Pooled numbers support, never replace, expert judgement; hazard conclusions rest with the
committee and with local regulation and licensed practice.
"""
