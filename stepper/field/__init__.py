"""Fields and polynomials: the arithmetic everything else stands on.

Named and user-defined prime fields and their extensions (:mod:`.field`), the
fixed-width element encoding (:mod:`.elements`), reading a ``field`` declaration
(:mod:`.spec`), vectorised kernels (:mod:`.kernels`), round polynomials,
multilinear extensions and the eq polynomial (:mod:`.poly`, :mod:`.lagrange`),
and expressions over the field (:mod:`.expr`).
Pure: no I/O, and nothing here imports from any other stepper package but
:mod:`stepper.errors`.
"""
