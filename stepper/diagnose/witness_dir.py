"""The binary witness: a folder of raw little-endian tables and a small JSON manifest.

A JSON witness spells every element in decimal text: at 2^20 entries per table it is
about three times the raw bytes and parsing it dominates ``check --witness``. The
binary witness keeps each table as the bytes the machine holds, in a ``.npy`` file
(numpy's documented array format: a short text header, then the raw array), so it
is written at about the speed of the disk and read memory-mapped, page by page,
without a parse::

    W/                         (the name given to --witness-out / --witness)
      witness.json             the manifest (below)
      0-a.npy, 0-b.npy, ...    one file per table, named by the manifest

The manifest is a JSON map::

    {"format": "stepper-witness-folder/1",
     "field": {... the transcript's `field` event without "type" ...},
     "element": {"word": "<u4" | "<u8", "limbs": L},
     "instances": [{"name": ..., "combine": EXPR, "order": "low-first",
                    "tables": {"a": "0-a.npy", ...}}]}

Each table holds 2^num_vars elements. Below 2^32 a base element is one ``<u4`` word,
below 2^64 one ``<u8`` word; above (BN254, BLS12-381) it is L = ceil(bits(p) / 64)
``<u8`` words, least significant first, on a last axis of length L. An extension
element adds an axis of its k coefficients, constant first. So a table's shape is
(n,), (n, k), (n, L) or (n, k, L). Table files are plain names inside the folder (no
``/``, no ``..``). Writing goes to a hidden temporary folder beside ``W``, renamed to
``W`` at the end; an existing ``W`` is never replaced.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import tempfile
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable

import numpy as np

from stepper.errors import InputError, WitnessError, Where

if TYPE_CHECKING:
    from stepper.field.field import Field

FolderInstance = tuple[str, dict[str, np.ndarray], str]  # name, raw tables, combine text

__all__ = ["FORMAT", "MANIFEST", "is_witness_folder", "load_witness_folder", "write_witness_folder",
           "element_layout"]

FORMAT = "stepper-witness-folder/1"
MANIFEST = "witness.json"
_MANIFEST_MAX_BYTES = 16 << 20
_SAFE = re.compile(r"[^A-Za-z0-9_.-]")


def is_witness_folder(path: str | os.PathLike[str]) -> bool:
    """Whether ``path`` is a folder holding a binary witness manifest."""
    return Path(path).is_dir() and (Path(path) / MANIFEST).is_file()


def element_layout(field: Field) -> tuple[str, int]:
    """The numpy word type and the words per base element for ``field``."""
    if field.p < 2**32:
        return "<u4", 1
    if field.p < 2**64:
        return "<u8", 1
    return "<u8", -(-field.p.bit_length() // 64)


# ----- writing ---------------------------------------------------------------------------------
def _words(field: Field, table: np.ndarray) -> np.ndarray:
    """A kernel array as the stored words (C-contiguous, little-endian)."""
    word, limbs = element_layout(field)
    if limbs == 1:
        return np.ascontiguousarray(table, dtype=word)
    flat = np.asarray(table, dtype=object).reshape(-1)
    mask = (1 << 64) - 1
    out = np.empty((flat.size, limbs), dtype=word)
    for i in range(limbs):  # one object pass per 64-bit word
        out[:, i] = np.bitwise_and(np.right_shift(flat, 64 * i), mask).astype(np.uint64)
    return out.reshape(*table.shape, limbs)


def write_witness_folder(path: str | os.PathLike[str], field: Field,
                         instances: Iterable[tuple[str, dict[str, np.ndarray], str, str]], *,
                         replace: bool = False) -> None:
    """Write a binary witness to the new folder ``path`` from (name, tables, combine, order)
    per instance; raises :class:`InputError` when ``path`` exists (a file there is replaced
    when ``replace``; a folder never) or cannot be written."""
    target = Path(path)
    if os.path.lexists(target) and (target.is_dir() or not replace):
        raise InputError(f"expected a new path for the witness folder, found an existing "
                         f"{'folder' if target.is_dir() else 'file'} at {target} (it is never replaced)")
    word, limbs = element_layout(field)
    parent = target.parent if str(target.parent) else Path(".")
    try:
        temporary = Path(tempfile.mkdtemp(prefix=f".{target.name}.", suffix=".partial", dir=parent))
    except OSError as err:
        raise InputError(f"expected to write the witness folder {target}, but "
                         f"{(err.strerror or str(err)).lower()}") from None
    try:
        entries = []
        for index, (name, tables, combine, order) in enumerate(instances):
            files: dict[str, Any] = {}
            for tname, table in tables.items():
                fname = f"{index}-{_SAFE.sub('_', tname)[:64]}.npy"
                while fname in files.values():
                    fname = f"_{fname}"
                np.save(temporary / fname, _words(field, table), allow_pickle=False)
                files[tname] = fname
            entries.append({"name": name, "combine": combine, "order": order, "tables": files})
        manifest = {"format": FORMAT, "field": field.spec(), "element": {"word": word, "limbs": limbs},
                    "instances": entries}
        (temporary / MANIFEST).write_text(json.dumps(manifest, indent=1) + "\n", encoding="utf-8")
        if target.is_dir() or (os.path.lexists(target) and not replace):
            raise InputError(f"expected a new path for the witness folder, found {target} created meanwhile")
        if os.path.lexists(target):
            os.unlink(target)  # a file, replaced as asked
        os.rename(temporary, target)
    except OSError as err:
        shutil.rmtree(temporary, ignore_errors=True)
        raise InputError(f"expected to write the witness folder {target}, but "
                         f"{(err.strerror or str(err)).lower()}") from None
    except BaseException:
        shutil.rmtree(temporary, ignore_errors=True)
        raise


# ----- reading ---------------------------------------------------------------------------------
def load_witness_folder(path: str | os.PathLike[str], limits: Any) -> list[FolderInstance]:
    """Read the manifest and memory-map every table: (name, tables, combine text) per instance,
    entries kept as raw words (:func:`stepper.diagnose.witness_fit.fit_witness` checks them against
    the transcript's field). ``limits`` is the caller's ``WitnessLimits``. Raises
    :class:`WitnessError`."""
    folder = Path(path)
    where = Where(file=str(folder / MANIFEST))
    try:
        size = (folder / MANIFEST).stat().st_size
        if size > _MANIFEST_MAX_BYTES:
            raise WitnessError(f"expected a manifest of at most {_MANIFEST_MAX_BYTES} bytes, found {size}", where)
        manifest = json.loads((folder / MANIFEST).read_bytes().decode("utf-8"))
    except OSError as err:
        raise WitnessError(f"expected a readable manifest, found {err.strerror or err}", where) from None
    except (UnicodeDecodeError, json.JSONDecodeError, RecursionError) as err:
        raise WitnessError(f"expected a JSON manifest, found undecodable text ({str(err)[:80]})", where) from None
    if not isinstance(manifest, dict) or manifest.get("format") != FORMAT:
        found = manifest.get("format") if isinstance(manifest, dict) else type(manifest).__name__
        raise WitnessError(f"expected a manifest with \"format\": {FORMAT!r}, found {str(found)[:60]!r}", where)
    element = manifest.get("element")
    if not isinstance(element, dict) or element.get("word") not in ("<u4", "<u8") \
            or not isinstance(element.get("limbs"), int) or not 1 <= element["limbs"] <= 16:
        raise WitnessError(f"expected \"element\": {{\"word\": \"<u4\" or \"<u8\", \"limbs\": 1..16}}, found "
                           f"{str(element)[:80]}", where)
    word, limbs = element["word"], element["limbs"]
    items = manifest.get("instances")
    if not isinstance(items, list) or not items:
        raise WitnessError("expected \"instances\" to be a non-empty list", where)
    instances = []
    for i, item in enumerate(items):
        iwhere = where.but(instance=i)
        if not isinstance(item, dict) or not isinstance(item.get("name", ""), str) \
                or not isinstance(item.get("combine"), str) or not isinstance(item.get("tables"), dict) \
                or not item["tables"]:
            raise WitnessError("expected an instance map with a text \"combine\" and a non-empty \"tables\" map "
                               "of NAME -> file", iwhere)
        name = item.get("name", str(i))
        iwhere = where.but(instance=name)
        tables = {tname: _table(folder, fname, tname, word, limbs, limits, iwhere)
                  for tname, fname in item["tables"].items()}
        instances.append((name, tables, item["combine"]))
    return instances


def _table(folder: Path, fname: Any, tname: str, word: str, limbs: int, limits: Any,
           where: Where) -> np.ndarray:
    if not isinstance(fname, str) or not fname or "/" in fname or "\\" in fname or fname in (".", "..") \
            or fname.startswith(".."):
        raise WitnessError(f"expected table {tname!r} as a file name inside the witness folder, found "
                           f"{str(fname)[:60]!r}", where)
    try:
        arr = np.load(folder / fname, allow_pickle=False, mmap_mode="r")
    except (OSError, ValueError) as err:
        raise WitnessError(f"expected table {tname!r} in {fname!r}, found {str(err)[:120]}", where) from None
    if arr.shape and arr.shape[0] > limits.max_entries:
        raise limits.refuse(f"table {tname!r} with at most {{limit}} entries", "max_entries",
                            f"{arr.shape[0]} declared in its header", where)
    base_ndim = 1 if limbs == 1 else 2
    if arr.dtype != np.dtype(word) or arr.ndim not in (base_ndim, base_ndim + 1) \
            or (limbs > 1 and arr.shape[-1] != limbs):
        raise WitnessError(f"expected table {tname!r} of {word} words, shape (n,) or (n, k)"
                           + (f" with a last axis of {limbs} limbs" if limbs > 1 else "")
                           + f", found dtype {arr.dtype.str} shape {arr.shape}", where)
    if limbs == 1:
        return arr  # type: ignore[no-any-return]
    from stepper.verify.cells import words_to_ints

    bytes_per = 8 * limbs
    ints = words_to_ints(np.ascontiguousarray(arr).view(np.uint8).reshape(-1, bytes_per))
    return ints.reshape(arr.shape[:-1])
