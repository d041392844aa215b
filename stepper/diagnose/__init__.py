"""Diagnosis with the witness: the honest rounds, the root cause, and bug-class probes.

Witness files (:mod:`.witness`), honest
folding (:mod:`.honest`), the first lie (:mod:`.rootcause`) and the probes that
name a known bug class (:mod:`.probes`, :mod:`.order_probes`,
:mod:`.probe_evidence`, :mod:`.radix`).
"""
