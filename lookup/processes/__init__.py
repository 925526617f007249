"""Point processes: the CSR null and every alternative or null model.

``csr`` (the binomial CSR null, replicate seeds, window bounding boxes) <-
``alternatives`` (Thomas, Matérn, hard core, Strauss, lattice, voids,
inhomogeneous Poisson) <- ``registry`` (named models ``NAME:key=value``,
their parsing and simulation conditioned on n).  Imports go one way only.
"""
