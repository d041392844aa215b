"""The Brackwater Ferries scenario: deterministic, honest days are permutations, tampers break exactly one thing."""

from __future__ import annotations

import hashlib

import pytest

from stepper.errors import UsageError
from stepper.field.field import NAMED_PRIMES, get_field
from stepper.provers.scenario import SAILINGS, build_sailing, deck_tables, ticket_values


def test_the_same_seed_gives_the_same_sailing_and_seed_740_is_the_demo_sailing():
    assert build_sailing(740, 5) == build_sailing(740, 5)
    assert build_sailing(740, 5).name == "isle-of-quill-0740" == SAILINGS[0]
    assert build_sailing(741, 5) != build_sailing(740, 5)


def test_an_honest_boarding_log_is_the_ledger_in_scan_order():
    sailing = build_sailing(3, 6)
    assert len(set(sailing.tickets)) == 64
    assert sorted(sailing.boarding) == sorted(sailing.tickets)
    assert all(sailing.boarding[x] == sailing.tickets[s] for x, s in enumerate(sailing.scan_of))


def test_double_scan_logs_one_ticket_twice_and_misses_another():
    sailing = build_sailing(3, 6, tamper="double-scan")
    assert len(set(sailing.boarding)) == 63
    assert len(set(sailing.tickets) - set(sailing.boarding)) == 1


def test_deck_records_are_well_formed_unless_a_phantom_car_is_added():
    honest = build_sailing(4, 6)
    assert all(o in (0, 1) and (o or length == 0) for o, length in zip(honest.occupied, honest.length))
    phantom = build_sailing(4, 6, tamper="phantom-car")
    broken = [i for i, (o, length) in enumerate(zip(phantom.occupied, phantom.length)) if o == 0 and length]
    assert len(broken) == 1


def test_ticket_values_are_sha256_of_the_code_reduced_mod_p():
    # SHA-256 from Python's hashlib (FIPS 180-4), reduced as documented in stepper/provers/scenario.py
    field = get_field(NAMED_PRIMES["babybear"])
    code = build_sailing(740, 2).tickets[0]
    expected = int.from_bytes(hashlib.sha256(code.encode()).digest(), "little") % field.p
    assert int(ticket_values(field, (code,))[0]) == expected
    tables = deck_tables(field, build_sailing(740, 2))
    assert set(tables) == {"occupied", "length"} and len(tables["length"]) == 4


def test_bad_sizes_and_tampers_are_usage_errors():
    with pytest.raises(UsageError, match="num_vars"):
        build_sailing(1, 0)
    with pytest.raises(UsageError, match="tamper"):
        build_sailing(1, 3, tamper="storm")
