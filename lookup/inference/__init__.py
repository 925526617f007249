"""From summaries to p-values: null tables, instant tests and Monte Carlo.

``tablereader`` (opens the HDF5 null tables), ``nullmoments`` (null moments
for any window and n), ``globaltests`` and ``extremes`` (null laws of curve
and extreme statistics), ``asymptotic`` (the instant tests and their trust
verdict), ``ranks`` and ``montecarlo`` (simulated nulls, ranks, envelopes)
and ``adjust`` (multiple-testing adjustment).
"""
