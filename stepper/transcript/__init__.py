"""The transcript: event records, the folded model, and the files that hold them.

Event records and ordering rules (:mod:`.events`, :mod:`.model`), payload
encoding (:mod:`.payloads`, :mod:`.packed`), the msgpack store (:mod:`.store`),
JSON-lines event files (:mod:`.jsonl`) and the in-process :mod:`.recorder`.
Depends only on :mod:`stepper.field` and :mod:`stepper.errors`.
"""
