"""Seeded toy sampler for demo and test data (never physics predictions).

Modules: ``pdfs`` (toy parton densities, running alpha_s), ``kinematics`` (two-body decays,
boosts, Breit-Wigner masses), ``ttbar`` and ``drellyan`` (LO samplers), ``driver`` (integration,
unweighting, weight modes), ``record`` (event records, variation weights), ``detector`` (toy
detector ntuple), ``samples`` (write the files; used by ``evtkin toy``).
"""
