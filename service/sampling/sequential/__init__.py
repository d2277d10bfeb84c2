"""Sequential and stratified evaluation of tests of controls.

- :mod:`.staged`: stop-or-go plans of two or three stages, their exact risks by
  convolution over the stages, and the evaluation of a finished staged test;
- :mod:`.anytime`: confidence sequences, valid whenever the testing stops;
- :mod:`.strata`: one upper deviation limit for a population sampled in strata.
"""
