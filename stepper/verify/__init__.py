"""The verifier: replaying a transcript round by round and saying what failed.

The steppable :mod:`.replay` with its round checks (:mod:`.round_checks`), its
streaming fast path (:mod:`.streaming`) and its per-instance :mod:`.ledger`, the records
of each check (:mod:`.results`), the report and its JSON (:mod:`.verdict`), challenge
re-derivation (:mod:`.challenges`, :mod:`.fiatshamir`, :mod:`.binding`), the soundness bound, sentences
(:mod:`.text`), and the whole-file fast path (:mod:`.sweep`, :mod:`.roundblock`).
Reads transcripts only through :mod:`stepper.transcript`'s public functions.
"""
