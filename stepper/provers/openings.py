"""Openings a reference prover sends after an instance, with the glue faults applied.

An opening is the prover's claimed value of a committed table's multilinear
extension at the challenge point of the instance it follows. An honest prover
has that value already: it is the table folded by every challenge down to one
entry. :func:`send_openings` sends one ``opening`` per table, in the order
given, and applies the faults of the opening kind here, in one place:

* ``open-reversed``     every opening taken at the challenge point read
                        backwards (x_mu .. x_1 instead of x_1 .. x_mu);
* ``open-other-point``  every opening taken at the challenge point of an earlier
                        instance with as many variables (the wrong instance's point);
* ``open-wrong-table``  the first opening carries the second table's value
                        (two tables' openings crossed).

A faulty opening is recomputed from the unfolded table (an oracle evaluation,
not counted: an honest prover would never do it). Pure apart from the channel.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Mapping, Sequence

from stepper.errors import UsageError
from stepper.field.poly import mle_eval

if TYPE_CHECKING:
    import numpy as np

    from stepper.field.field import Element
    from stepper.provers.channel import ProofChannel

__all__ = ["OPENING_FAULTS", "send_openings", "opened_values"]

OPENING_FAULTS = ("open-reversed", "open-other-point", "open-wrong-table")


def opened_values(channel: ProofChannel, tables: Mapping[str, np.ndarray], folded: Mapping[str, Element],
                  point: Sequence[Element], earlier_points: Sequence[Sequence[Element]] = ()) -> dict[str, Element]:
    """The value the prover opens for each table (in ``tables`` order): the folded
    entry, or what the opening fault aimed at the current instance makes of it."""
    field = channel.field
    fault = channel.fault
    names = list(tables)
    out = {n: folded[n] for n in names}
    if fault is None or fault.instance != channel.instance or fault.name not in OPENING_FAULTS:
        return out
    if fault.name == "open-wrong-table":
        if len(names) < 2:
            raise UsageError(f"fault open-wrong-table needs two opened tables; instance {channel.instance} opens "
                             f"{len(names)}")
        out[names[0]] = out[names[1]]
        return out
    if fault.name == "open-reversed":
        if len(point) < 2:
            raise UsageError(f"fault open-reversed needs a point of two or more variables; instance "
                             f"{channel.instance} has {len(point)}")
        at = tuple(reversed(tuple(point)))
    else:
        same = [tuple(p) for p in earlier_points if len(p) == len(point)]
        if not same:
            raise UsageError(f"fault open-other-point needs an earlier instance with {len(point)} variables; "
                             f"instance {channel.instance} has none before it")
        at = same[-1]
    return {n: mle_eval(field, tables[n], at) for n in names}


def send_openings(channel: ProofChannel, tables: Mapping[str, np.ndarray], folded: Mapping[str, Element],
                  point: Sequence[Element], *, prefix: str = "",
                  earlier_points: Sequence[Sequence[Element]] = ()) -> dict[str, Element]:
    """Send one ``opening`` per table (named ``prefix + table``, opening table
    ``table``); returns the values sent, by table name."""
    values = opened_values(channel, tables, folded, point, earlier_points)
    for name, value in values.items():
        channel.opening(prefix + name, value, table=name if prefix else None)
    return values
