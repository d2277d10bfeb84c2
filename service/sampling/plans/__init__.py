"""Plans for how tests of controls are run in practice.

Each module answers one situation with the public functions of
:mod:`service.sampling.attributes` and the model tails of
:mod:`service.sampling.distributions`:

- :mod:`.multiple`: one sample tested for several attributes;
- :mod:`.two_risks`: a plan bounding both the risk of overreliance and the risk of
  underreliance;
- :mod:`.bayesian`: planning and evaluation with a beta prior, beside the classical answer;
- :mod:`.periodic`: what the frequency-based sizes of common practice prove for periodic
  controls.
"""
