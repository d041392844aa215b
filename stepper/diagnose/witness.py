"""Witness files: the prover's multilinear tables and `combine` expression per instance.

Accepted forms (detected by content, not by file name):

* JSON or msgpack: ``{"instances": [{"name": ..., "tables": {NAME: [...]}, "combine": EXPR}]}``
  per transcripts/EVENTS.md. Table entries are field elements (int, decimal or 0x string, a
  list of k values for an extension element; msgpack may also use fixed-width
  little-endian bytes). A table may instead be a string: the path of a ``.npy``
  file, relative to the witness file, holding the entries (large tables).
* a binary witness folder (:mod:`stepper.diagnose.witness_dir`): a JSON manifest and one
  raw little-endian ``.npy`` file per table, memory-mapped;
* ``.npz`` (a numpy zip): for each instance NAME, a 0-d text array
  ``NAME/combine`` and one integer array ``NAME/TABLE`` per table; instances
  are taken in the order their combine arrays appear, and a key belongs to the
  instance with the longest matching name (names may contain ``/``).

Numpy tables are unsigned or non-negative signed integer arrays, shape (n,) or
(n, k) for an extension; pickled objects are refused. :func:`load_witness`
does the I/O and keeps entries raw (the field is not known yet);
:func:`stepper.diagnose.witness_fit.fit_witness` (pure) matches witness instances to
transcript instances and checks their tables against the field.
"""

from __future__ import annotations

import json
import mmap
import os
import re
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence, Union

import numpy as np

from stepper.diagnose.witness_json import MIN_BYTES, Text, put_back, split_tables
from stepper.errors import ExpressionError, WitnessError, Where
from stepper.field.expr import Expr, parse

__all__ = ["Witness", "WitnessInstance", "WitnessLimits", "load_witness", "witness_from_map", "json_depth"]

MAX_INSTANCES = 1 << 16
_FIRST_BYTE = re.compile(rb"[^ \t\n\r\x0b\x0c]")  # the first byte bytes.lstrip() would keep


@dataclass(frozen=True, slots=True)
class WitnessLimits:
    """Bounds checked before a witness is decoded or converted, so that a hostile file costs
    neither unbounded memory nor a crashed interpreter. Each can be raised by the environment
    variable named in ``ENV`` (read by :meth:`from_environment`)."""

    max_bytes: int = 1 << 30  # JSON/msgpack text; big tables belong in .npy files
    max_depth: int = 32  # nesting of lists and maps; a witness needs 6
    max_entries: int = 1 << 32  # entries of one table, declared (.npy header) or actual

    ENV = {"max_bytes": "STEPPER_WITNESS_MAX_BYTES", "max_depth": "STEPPER_WITNESS_MAX_DEPTH",
           "max_entries": "STEPPER_WITNESS_MAX_ENTRIES"}

    @classmethod
    def from_environment(cls, environ: Mapping[str, str] | None = None) -> WitnessLimits:
        environ = os.environ if environ is None else environ
        values: dict[str, int] = {}
        for name, var in cls.ENV.items():
            text = environ.get(var)
            if text is None:
                continue
            if not text.strip().isdigit() or int(text) < 1:
                raise WitnessError(f"expected {var} to be a positive whole number, found {text[:40]!r}")
            values[name] = int(text)
        return cls(**values)

    def refuse(self, what: str, name: str, found: object, where: Where) -> WitnessError:
        """The error for a witness past the limit ``name`` (``what`` holds ``{limit}``), saying how to raise it."""
        limit = getattr(self, name)
        return WitnessError(f"expected {what.format(limit=limit)}, found {found} (a limit; raise it with "
                            f"{self.ENV[name]}=N if the witness is genuine)", where)

RawTable = Union[np.ndarray, Sequence[Any]]


@dataclass(frozen=True, slots=True)
class WitnessInstance:
    """One instance as written: its name, raw tables and combine expression."""

    name: str
    tables: Mapping[str, RawTable]
    combine: Expr


@dataclass(frozen=True, slots=True)
class Witness:
    """Every instance of a witness file, in file order; ``source`` names the file."""

    instances: tuple[WitnessInstance, ...]
    source: str = ""



# ----- loading (I/O edge) --------------------------------------------------------------
def load_witness(path: str | os.PathLike[str], limits: WitnessLimits | None = None) -> Witness:
    """Read a witness file in any accepted form; raises :class:`WitnessError`, also for a
    file past ``limits`` (default: :meth:`WitnessLimits.from_environment`)."""
    path = Path(path)
    where = Where(file=str(path))
    limits = limits or WitnessLimits.from_environment()
    if path.is_dir():
        from stepper.diagnose.witness_dir import is_witness_folder, load_witness_folder

        if is_witness_folder(path):
            folder = Where(file=str(path / "witness.json"))
            return Witness(tuple(WitnessInstance(name, tables, _parse_combine(text, folder.but(instance=name)))
                                 for name, tables, text in load_witness_folder(path, limits)), str(path))
    try:
        size = path.stat().st_size
        with path.open("rb") as handle:
            head = handle.read(8)
    except OSError as err:
        raise WitnessError(f"expected a readable witness file, found {err.strerror or err}", where) from None
    if head.startswith(b"PK"):
        return _load_npz(path, where, limits)
    if size > limits.max_bytes:
        raise limits.refuse("a JSON or msgpack witness of at most {limit} bytes", "max_bytes", size, where)
    if head.startswith(b"\x93NUMPY"):
        raise WitnessError(
            "expected a JSON, msgpack or .npz witness, found a single .npy array "
            "(name it from a JSON witness: \"tables\": {\"NAME\": \"file.npy\"})", where)
    try:
        data = _text_of(path, size)
    except (OSError, ValueError) as err:
        raise WitnessError(f"expected a readable witness file, found {getattr(err, 'strerror', None) or err}",
                           where) from None
    try:
        return _from_text(data, path, where, limits)
    finally:
        if isinstance(data, mmap.mmap):
            try:
                data.close()
            except BufferError:  # an array still reads from it: the mapping goes with that array
                pass


def _text_of(path: Path, size: int) -> Text:
    """The file's bytes; a large file as a read-only memory mapping instead, whose pages the JSON
    reader hands back as it goes (:mod:`stepper.diagnose.witness_json`)."""
    if size < MIN_BYTES:
        return path.read_bytes()
    with path.open("rb") as handle:
        return mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ)


def _from_text(data: Text, path: Path, where: Where, limits: WitnessLimits) -> Witness:
    """A JSON or msgpack witness from its bytes (or their mapping)."""
    opening = _FIRST_BYTE.search(data)
    if opening is not None and opening.group() in (b"{", b"["):
        text, nesting, arrays = split_tables(data)  # large integer arrays read whole by numpy
        depth = json_depth(nesting)
        if depth > limits.max_depth:
            raise limits.refuse("lists and maps nested at most {limit} deep", "max_depth", f"{depth} levels",
                                where)
        try:
            try:
                raw = put_back(json.loads(text.decode("utf-8")), arrays)
            except ValueError:  # JSON or UTF-8 errors: decoded again whole, to name the place in the file itself
                if not arrays:
                    raise
                raw = json.loads(bytes(data).decode("utf-8"))
        except UnicodeDecodeError as err:
            raise WitnessError(f"expected UTF-8 JSON, found an invalid byte at byte {err.start}", where) from None
        except json.JSONDecodeError as err:
            raise WitnessError(f"expected JSON, found {err.msg}", where.but(line=err.lineno, offset=err.pos)) from None
        except RecursionError:  # json_depth counts what the decoder nests; kept as a second guard
            raise limits.refuse("lists and maps nested at most {limit} deep", "max_depth",
                                "more levels than Python can decode", where) from None
    else:
        raw = _unpack_msgpack(bytes(data), where, limits)
    return witness_from_map(raw, where, base_dir=path.parent, limits=limits)


def json_depth(data: bytes) -> int:
    """How deeply the lists and maps of a JSON text nest (brackets inside strings not
    counted), found with numpy in a few passes over the bytes and no recursion, a
    megabyte at a time (the string parity and the depth carried across), so that its
    memory stays a few megabytes whatever the size of the text."""
    # drop escaped backslashes, then escaped quotes: every quote left opens or closes a string
    plain = data.replace(b"\\\\", b"").replace(b'\\"', b"")
    raw = np.frombuffer(plain, dtype=np.uint8)
    best = depth = inside = 0
    for start in range(0, raw.size, _DEPTH_CHUNK):
        part = raw[start:start + _DEPTH_CHUNK]
        # parity of the quotes so far (uint8 sums wrap mod 256, which keeps the parity)
        quotes = (np.cumsum(part == ord('"'), dtype=np.uint8) + np.uint8(inside)) & np.uint8(1)
        step = np.zeros(part.size, dtype=np.int8)
        step[(part == ord("[")) | (part == ord("{"))] = 1
        step[(part == ord("]")) | (part == ord("}"))] = -1
        step[quotes == 1] = 0
        levels = np.cumsum(step, dtype=np.int64)
        best = max(best, depth + int(levels.max()))
        depth += int(levels[-1])
        inside = int(quotes[-1])
    return best


_DEPTH_CHUNK = 1 << 20


def _unpack_msgpack(data: bytes, where: Where, limits: WitnessLimits) -> Any:
    import msgpack

    try:
        raw = msgpack.unpackb(data, raw=False, strict_map_key=True, max_bin_len=len(data),
                              max_array_len=len(data))
    except msgpack.ExtraData as err:
        raise WitnessError(f"expected one msgpack map, found {len(err.extra)} extra bytes after it", where) from None
    except (ValueError, msgpack.UnpackException, TypeError) as err:
        raise WitnessError(f"expected a JSON or msgpack witness, found undecodable data ({err})", where) from None
    depth = _nesting(raw, limits.max_depth)
    if depth > limits.max_depth:
        raise limits.refuse("lists and maps nested at most {limit} deep", "max_depth",
                            f"more than {limits.max_depth} levels", where)
    return raw


def _nesting(raw: Any, stop: int) -> int:
    """How deeply ``raw`` nests lists and maps, walked level by level without recursion;
    stops counting one level past ``stop``."""
    level = [raw] if isinstance(raw, (dict, list)) else []
    depth = 0
    while level:
        depth += 1
        if depth > stop:
            break
        level = [c for item in level for c in (item.values() if isinstance(item, dict) else item)
                 if isinstance(c, (dict, list))]
    return depth


def _load_npz(path: Path, where: Where, limits: WitnessLimits) -> Witness:
    try:
        archive = np.load(path, allow_pickle=False)
    except (OSError, ValueError, zipfile.BadZipFile) as err:
        raise WitnessError(f"expected a readable .npz archive, found {err}", where) from None
    with archive:
        keys = list(archive.files)
        names = [k[: -len("/combine")] for k in keys if k.endswith("/combine")]
        if not names:
            raise WitnessError(
                "expected an .npz witness with a NAME/combine text array per instance, found none "
                f"(keys: {', '.join(keys[:8]) or 'none'})", where)
        # a table belongs to the instance with the longest name prefix (names may contain "/")
        owner: dict[str, list[str]] = {name: [] for name in names}
        for key in keys:
            if key.endswith("/combine") and key[: -len("/combine")] in owner:
                continue
            matches = [n for n in names if key.startswith(f"{n}/")]
            if not matches:
                raise WitnessError(f"expected every .npz key to be INSTANCE/TABLE of an instance with a combine, "
                                   f"found {key!r}", where)
            owner[max(matches, key=len)].append(key)
        instances: list[WitnessInstance] = []
        for name in names:
            iwhere = where.but(instance=name)
            combine_arr = archive[f"{name}/combine"]
            if combine_arr.dtype.kind != "U" or combine_arr.ndim != 0:
                raise WitnessError(
                    f"expected {name}/combine as a 0-d text array, found dtype {combine_arr.dtype} "
                    f"shape {combine_arr.shape}", iwhere)
            combine = _parse_combine(str(combine_arr[()]), iwhere)
            cut = len(name) + 1
            tables = {k[cut:]: _check_numpy(_npz_table(archive, k, limits, iwhere), k[cut:], iwhere)
                      for k in owner[name]}
            instances.append(WitnessInstance(name, tables, combine))
    return Witness(tuple(instances), str(path))


def _npz_table(archive: Any, key: str, limits: WitnessLimits, where: Where) -> np.ndarray:
    """One array of an .npz, its declared shape checked against the limit before it is read."""
    try:
        with archive.zip.open(f"{key}.npy") as member:
            version = np.lib.format.read_magic(member)
            fmt = np.lib.format
            read = fmt.read_array_header_1_0 if version == (1, 0) else fmt.read_array_header_2_0
            shape, _, _ = read(member)
    except (KeyError, OSError, ValueError, zipfile.BadZipFile) as err:
        raise WitnessError(f"expected a readable array {key!r} in the .npz archive, found {err}", where) from None
    _check_declared(shape, key, limits, where)
    try:
        return archive[key]
    except (OSError, ValueError, zipfile.BadZipFile) as err:
        raise WitnessError(f"expected a readable array {key!r} in the .npz archive, found {err}", where) from None


def _check_declared(shape: tuple[int, ...], table: str, limits: WitnessLimits, where: Where) -> None:
    entries = shape[0] if shape else 1
    if entries > limits.max_entries:
        raise limits.refuse(f"table {table!r} with at most {{limit}} entries", "max_entries",
                            f"{entries} declared in its header", where)


def _load_npy(base_dir: Path | None, ref: str, table: str, where: Where, limits: WitnessLimits) -> np.ndarray:
    target = Path(ref) if base_dir is None or Path(ref).is_absolute() else base_dir / ref
    try:
        arr = np.load(target, allow_pickle=False, mmap_mode="r")
    except (OSError, ValueError) as err:
        raise WitnessError(f"expected table {table!r} in the .npy file {str(target)!r}, found {err}", where) from None
    _check_declared(arr.shape, table, limits, where)
    return _check_numpy(arr, table, where)


def _check_numpy(arr: np.ndarray, table: str, where: Where) -> np.ndarray:
    if arr.dtype.kind not in "ui" or arr.ndim not in (1, 2):
        raise WitnessError(
            f"expected table {table!r} as a 1-D or 2-D integer array, found dtype {arr.dtype} shape {arr.shape}", where)
    return arr


# ----- the witness map (pure) -------------------------------------------------------------
def _kind(value: Any) -> str:
    """What a decoded JSON or msgpack value is, in the words of the file (not Python's type names)."""
    if value is None:
        return "none (null, or the key is missing)"
    for types, words in ((bool, "true or false"), (int, "an integer"), (float, "a number"), (str, "text"),
                         ((bytes, bytearray), "bytes"), (list, "a list"), (dict, "a map")):
        if isinstance(value, types):
            return words
    return type(value).__name__


def witness_from_map(raw: Any, where: Where | None = None, base_dir: Path | None = None,
                     limits: WitnessLimits | None = None) -> Witness:
    """A :class:`Witness` from the decoded JSON/msgpack map; ``base_dir`` resolves
    ``.npy`` table references (None forbids them)."""
    where = where or Where()
    limits = limits or WitnessLimits()
    if not isinstance(raw, dict) or "instances" not in raw:
        found = f"a map with keys {', '.join(map(str, list(raw)[:6]))}" if isinstance(raw, dict) else _kind(raw)
        raise WitnessError(f"expected a map with an \"instances\" list, found {found}", where)
    items = raw["instances"]
    if not isinstance(items, list) or not items:
        raise WitnessError("expected \"instances\" to be a non-empty list", where)
    if len(items) > MAX_INSTANCES:
        raise WitnessError(f"expected at most {MAX_INSTANCES} witness instances, found {len(items)}", where)
    out: list[WitnessInstance] = []
    for i, item in enumerate(items):
        iwhere = where.but(instance=i)
        if not isinstance(item, dict):
            raise WitnessError(f"expected witness instance {i} to be a map, found {_kind(item)}", iwhere)
        name = item.get("name", str(i))
        if not isinstance(name, str):
            raise WitnessError(f"expected a text \"name\", found {_kind(name)}", iwhere)
        iwhere = where.but(instance=name)
        tables = item.get("tables")
        if not isinstance(tables, dict) or not tables:
            raise WitnessError("expected \"tables\" to be a non-empty map of NAME -> entries", iwhere)
        combine = item.get("combine")
        if not isinstance(combine, str):
            raise WitnessError(f"expected \"combine\" as text, found {_kind(combine)}", iwhere)
        parsed: dict[str, RawTable] = {}
        for tname, entries in tables.items():
            if isinstance(entries, str):
                if base_dir is None:
                    raise WitnessError(f"expected table {tname!r} as a list of elements, found text", iwhere)
                parsed[tname] = _load_npy(base_dir, entries, tname, iwhere, limits)
            elif isinstance(entries, (list, np.ndarray)):  # an array: read from JSON text by witness_json
                if len(entries) > limits.max_entries:
                    raise limits.refuse(f"table {tname!r} with at most {{limit}} entries", "max_entries",
                                        len(entries), iwhere)
                parsed[tname] = entries
            else:
                raise WitnessError(
                    f"expected table {tname!r} as a list of elements or a .npy path, found {_kind(entries)}",
                    iwhere)
        out.append(WitnessInstance(name, parsed, _parse_combine(combine, iwhere)))
    return Witness(tuple(out), where.file or "")


def _parse_combine(text: str, where: Where) -> Expr:
    try:
        expr = parse(text)
    except ExpressionError as err:
        raise ExpressionError(f"{err.message} {text[:120]!r}", err.text, err.column, where) from None
    if not expr.names():
        raise WitnessError(f"expected a combine expression over at least one table, found {text!r}", where)
    if not expr.is_arithmetic():
        raise WitnessError(f"expected a combine of tables with + - * ^ and numbers; eq(), point(), final() and "
                           f"NAME[i] belong to a transcript's glue expressions, found {text[:120]!r}", where)
    return expr
