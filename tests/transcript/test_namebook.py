"""The instance name book answers as a full list of the names would.

Reference: a plain Python list of every name, searched from the end (the obvious
implementation the book replaces; common practice, no source)."""

from __future__ import annotations

import random

from stepper.transcript.namebook import RECENT, NameBook


def _last_in_list(names: list[str], name: str) -> int | None:
    for index in range(len(names) - 1, -1, -1):
        if names[index] == name:
            return index
    return None


def test_an_empty_book_knows_no_name() -> None:
    book = NameBook()
    assert len(book) == 0 and book.last("ferry") is None and "ferry" not in book


def test_positions_count_up_and_names_read_back() -> None:
    book = NameBook()
    names = ["sailing-1", "", "quay ✓", "sailing-1", "\ud800lone"]  # repeats, empty, non-ASCII, a lone surrogate
    assert [book.add(n) for n in names] == list(range(len(names)))
    assert [book.name_at(i) for i in range(len(names))] == names
    assert book.last("sailing-1") == 3 and book.last("") == 1 and book.last("\ud800lone") == 4


def test_old_and_repeated_names_match_the_full_list_past_the_recent_window() -> None:
    rng = random.Random(18)
    book, names = NameBook(), []
    for _ in range(3 * RECENT):
        name = f"crossing-{rng.randrange(2 * RECENT)}"  # many repeats, many evicted from the window
        names.append(name)
        assert book.add(name) == len(names) - 1
    for probe in [f"crossing-{i}" for i in range(2 * RECENT + 5)] + ["nowhere", names[0], names[-1]]:
        assert book.last(probe) == _last_in_list(names, probe), probe
        assert (probe in book) == (probe in names)


def test_a_non_string_is_never_in_the_book() -> None:
    book = NameBook()
    book.add("7")
    assert 7 not in book and None not in book


def test_names_added_all_at_once_read_back_as_names_added_one_by_one() -> None:
    # the whole-file check hands thousands of instance names over in one call: the book must answer
    # exactly as the plain list does, repeats and names pushed out of the recent window included
    rng = random.Random(19)
    book, names = NameBook(), []
    for size in (1, 3, RECENT - 1, 1, 2 * RECENT + 7, 5, RECENT, 0, 40):
        batch = [rng.choice([f"crossing-{rng.randrange(3 * RECENT)}", "", "quay ✓", "\ud800lone"])
                 for _ in range(size)]
        book.add_all(batch)
        names += batch
        assert len(book) == len(names)
    assert [book.name_at(i) for i in range(len(names))] == names
    for probe in {*names, "nowhere", *(f"crossing-{i}" for i in range(0, 3 * RECENT, 7))}:
        assert book.last(probe) == _last_in_list(names, probe), probe
    assert book.add("after") == len(names)


def test_bulk_and_single_names_interleaved_with_questions_answer_as_the_list() -> None:
    # names added in bulk join the recent window only when a question comes (most are never asked for):
    # questions between bulk adds, single adds after bulk ones and windows that fill up between two
    # questions must all answer as the plain list does
    rng = random.Random(23)
    book, names = NameBook(), []
    for step in range(60):
        if rng.random() < 0.5:
            batch = [f"berth-{rng.randrange(RECENT)}" for _ in range(rng.choice((1, 7, RECENT // 3, RECENT + 3)))]
            book.add_all(batch)
            names += batch
        else:
            name = f"berth-{rng.randrange(RECENT)}"
            assert book.add(name) == len(names)
            names.append(name)
        if step % 3 == 0:
            for probe in (names[-1], names[rng.randrange(len(names))], f"berth-{rng.randrange(RECENT)}", "nowhere"):
                assert book.last(probe) == _last_in_list(names, probe), probe
    assert len(book) == len(names)
