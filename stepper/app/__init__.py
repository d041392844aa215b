"""The Textual app of ``stepper view``: screens over a pure view model.

``proof_model`` (with ``round_rows`` and the glue's ``glue_model``), ``readout``
(with ``glue_readout`` and ``lines``), ``bucket_charts`` and ``export`` are pure and
import no Textual; the screens and widgets (``*_screen``, ``round_table``,
``round_detail``, ``status_strip``) present them; ``source`` is the file edge.
"""

from __future__ import annotations

__all__: list[str] = []
