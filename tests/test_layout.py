"""The package keeps its shape: no import cycles, no import up the pipeline, a core without terminal code.

The rules and the one ordered list of packages live in ``tests/layout_rules.py``;
the fixture trees below show that each rule really fails when broken.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

from layout_rules import ORDER, Import, core_faults, cycles, layer_faults, longest_chain, read_imports

PACKAGE = Path(__file__).resolve().parent.parent / "stepper"


Tree = tuple[dict[str, Path], list[Import], list[Import]]  # modules, imports inside, imports outside


@pytest.fixture(scope="module")
def stepper_imports() -> Tree:
    """The real package read once per module (about half a second of parsing); no test changes it."""
    return read_imports(PACKAGE)


def _describe(path: list) -> str:
    return " -> ".join(f"{imp.source} ({imp.where()})" for imp in path) + f" -> {path[0].source}"


def test_no_module_of_stepper_takes_part_in_an_import_cycle(stepper_imports: Tree) -> None:
    _, inner, _ = stepper_imports
    found = cycles(inner)
    assert not found, "import cycles:\n" + "\n".join(_describe(path) for path in found)


def test_no_package_imports_one_later_in_the_pipeline_order(stepper_imports: Tree) -> None:
    _, inner, _ = stepper_imports
    assert layer_faults(inner) == []


def test_the_core_imports_no_terminal_library_and_no_edge(stepper_imports: Tree) -> None:
    _, inner, outer = stepper_imports
    assert core_faults(inner, outer) == []


def test_every_module_lives_in_a_package_of_the_order_or_at_the_root_with_the_error_tree(stepper_imports: Tree) -> None:
    modules, _, _ = stepper_imports
    loose = sorted(name for name in modules if name.count(".") == 1 and name.split(".")[1] not in ORDER)
    assert loose == ["stepper.__main__"]


@pytest.mark.parametrize("command", ["check_cmd", "view_cmd", "prove_cmd", "compare_cmd"])
def test_a_command_reaches_a_kernel_without_climbing_back_up_the_pipeline(command: str, stepper_imports: Tree) -> None:
    # stepper.cli.main imports each command's module by name (importlib), so the chain starts there
    _, inner, _ = stepper_imports
    chain = longest_chain(inner, f"stepper.cli.{command}", "stepper.field.kernels")
    assert chain[0] == f"stepper.cli.{command}" and chain[-1].startswith("stepper.field.kernels")
    ranks = [ORDER.index(name.split(".")[1]) for name in chain if name.split(".")[1] in ORDER]
    assert ranks == sorted(ranks, reverse=True), f"the chain climbs back up: {chain}"


# ----- the checks themselves, on small trees made for the purpose ------------------------


def _tree(tmp_path: Path, files: dict[str, str]) -> Path:
    root = tmp_path / "stepper"
    for name, body in files.items():
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(textwrap.dedent(body))
    for folder in {p.parent for p in root.rglob("*.py")} | {root}:
        (folder / "__init__.py").touch()
    return root


def test_a_cycle_through_a_function_level_import_is_found_and_named_with_file_and_line(tmp_path: Path) -> None:
    root = _tree(tmp_path, {
        "verify/replay.py": "from stepper.verify.ledger import Ledger\n",
        "verify/ledger.py": "def late():\n    from stepper.verify.replay import Replay\n",
    })
    _, inner, _ = read_imports(root)
    found = cycles(inner)
    assert len(found) == 1
    text = _describe(found[0])
    assert "stepper.verify.ledger" in text and "stepper.verify.replay" in text
    assert "ledger.py:2" in text


def test_a_type_checking_import_counts_for_a_cycle(tmp_path: Path) -> None:
    root = _tree(tmp_path, {
        "field/a.py": "from stepper.field.b import B\n",
        "field/b.py": "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    from stepper.field.a import A\n",
    })
    _, inner, _ = read_imports(root)
    assert len(cycles(inner)) == 1


def test_an_import_up_the_order_is_a_fault_naming_both_packages(tmp_path: Path) -> None:
    root = _tree(tmp_path, {
        "transcript/reader.py": "from stepper.verify.replay import Replay\n",
        "verify/replay.py": "from stepper.transcript.reader import read\n",
    })
    _, inner, _ = read_imports(root)
    faults = layer_faults(inner)
    assert len(faults) == 1
    assert "reader.py:1" in faults[0] and "'transcript' sits below 'verify'" in faults[0]


def test_nothing_imports_an_edge_and_the_app_never_imports_the_command_line(tmp_path: Path) -> None:
    root = _tree(tmp_path, {
        "share/report.py": "from stepper.cli.main import main\n",
        "app/app.py": "from stepper.cli.check_cmd import run\n",
        "cli/main.py": "import stepper.app.app\n",
    })
    _, inner, _ = read_imports(root)
    faults = layer_faults(inner)
    assert len(faults) == 2
    assert any("report.py:1" in f and "nothing imports the edge 'cli'" in f for f in faults)
    assert any("app.py:1" in f and "'app' sits below 'cli'" in f for f in faults)


def test_a_lazy_terminal_import_in_the_core_is_a_fault(tmp_path: Path) -> None:
    root = _tree(tmp_path, {
        "diagnose/rootcause.py": "def bar():\n    from rich.progress import Progress\n",
        "share/report.py": "import rich\n",
    })
    _, inner, outer = read_imports(root)
    faults = core_faults(inner, outer)
    assert len(faults) == 1 and "rootcause.py:2" in faults[0]


def test_relative_imports_resolve_to_the_module_they_name(tmp_path: Path) -> None:
    root = _tree(tmp_path, {
        "field/poly.py": "from .kernels import base\n",
        "field/kernels/base.py": "from ..poly import RoundPoly\n",
    })
    _, inner, _ = read_imports(root)
    assert {(i.source, i.target) for i in inner} == {
        ("stepper.field.poly", "stepper.field.kernels.base"),
        ("stepper.field.kernels.base", "stepper.field.poly"),
    }
    assert len(cycles(inner)) == 1


@pytest.mark.parametrize("count", [1, 2, 3])
def test_the_longest_chain_counts_every_step(tmp_path: Path, count: int) -> None:
    files = {f"field/m{i}.py": f"import stepper.field.m{i + 1}\n" for i in range(count)}
    files[f"field/m{count}.py"] = ""
    root = _tree(tmp_path, files)
    _, inner, _ = read_imports(root)
    assert longest_chain(inner, "stepper.field.m0", f"stepper.field.m{count}") == [
        f"stepper.field.m{i}" for i in range(count + 1)
    ]
