"""Reference sumcheck provers with honest multiplication counts and named faults.

* :mod:`~stepper.provers.generic`: sum of a `combine` expression over multilinear
  tables, and the eq-weighted zero-check;
* :mod:`~stepper.provers.permcheck`: permutation check, direct form (degree mu + 1);
* :mod:`~stepper.provers.grouped`: permutation check, grouped form with a bucketed
  second layer, switch-over round and batched group claims;
* :mod:`~stepper.provers.faults`: the bug classes a prover can be made to commit;
* :mod:`~stepper.provers.reference`: one entry point (a :class:`ProveSpec`) for all.

Provers are pure: they send records to a sink through a
:class:`~stepper.provers.channel.ProofChannel` (which draws Fiat-Shamir challenges
with the built-in schedule) and count every field product with a
:class:`~stepper.provers.counting.MulCounter`. Import from the submodules: this
package file stays empty so that ``stepper --help`` and ``stepper check`` do not
pay for numpy-heavy prover modules they never use.
"""

from __future__ import annotations

__all__: list[str] = []
