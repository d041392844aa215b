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
:func:`fit_witness` is pure: it matches witness instances to transcript
instances (by name, else by position) and returns canonical field arrays, or
raises :class:`WitnessError` saying what was expected, what was found, where.
"""

from __future__ import annotations

import json
import os
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping, Sequence, Union

import numpy as np

from stepper.errors import ExpressionError, FieldError, WitnessError, Where
from stepper.field.expr import Expr, parse

if TYPE_CHECKING:
    from stepper.field.field import Field
    from stepper.transcript.model import InstanceRecord, Transcript

__all__ = ["Witness", "WitnessInstance", "WitnessLimits", "FittedInstance", "load_witness", "witness_from_map",
           "fit_witness", "json_depth"]

MAX_INSTANCES = 1 << 16


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


@dataclass(frozen=True, slots=True)
class FittedInstance:
    """A witness instance checked against transcript instance ``index``: tables as
    canonical field vectors (1-D base, or (n, k) extension) of length 2^num_vars."""

    index: int
    name: str
    tables: Mapping[str, np.ndarray]
    combine: Expr
    witness_name: str = ""  # the witness instance's own name (differs when matched by position)


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
        data = path.read_bytes()
    except OSError as err:
        raise WitnessError(f"expected a readable witness file, found {err.strerror or err}", where) from None
    stripped = data.lstrip()
    if stripped[:1] in (b"{", b"["):
        depth = json_depth(data)
        if depth > limits.max_depth:
            raise limits.refuse("lists and maps nested at most {limit} deep", "max_depth", f"{depth} levels",
                                where)
        try:
            raw = json.loads(data.decode("utf-8"))
        except UnicodeDecodeError as err:
            raise WitnessError(f"expected UTF-8 JSON, found an invalid byte at byte {err.start}", where) from None
        except json.JSONDecodeError as err:
            raise WitnessError(f"expected JSON, found {err.msg}", where.but(line=err.lineno, offset=err.pos)) from None
        except RecursionError:  # json_depth counts what the decoder nests; kept as a second guard
            raise limits.refuse("lists and maps nested at most {limit} deep", "max_depth",
                                "more levels than Python can decode", where) from None
    else:
        raw = _unpack_msgpack(data, where, limits)
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
def witness_from_map(raw: Any, where: Where | None = None, base_dir: Path | None = None,
                     limits: WitnessLimits | None = None) -> Witness:
    """A :class:`Witness` from the decoded JSON/msgpack map; ``base_dir`` resolves
    ``.npy`` table references (None forbids them)."""
    where = where or Where()
    limits = limits or WitnessLimits()
    if not isinstance(raw, dict) or "instances" not in raw:
        found = f"a map with keys {', '.join(map(str, list(raw)[:6]))}" if isinstance(raw, dict) else type(raw).__name__
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
            raise WitnessError(f"expected witness instance {i} to be a map, found {type(item).__name__}", iwhere)
        name = item.get("name", str(i))
        if not isinstance(name, str):
            raise WitnessError(f"expected a text \"name\", found {type(name).__name__}", iwhere)
        iwhere = where.but(instance=name)
        tables = item.get("tables")
        if not isinstance(tables, dict) or not tables:
            raise WitnessError("expected \"tables\" to be a non-empty map of NAME -> entries", iwhere)
        combine = item.get("combine")
        if not isinstance(combine, str):
            raise WitnessError(f"expected \"combine\" as text, found {type(combine).__name__}", iwhere)
        parsed: dict[str, RawTable] = {}
        for tname, entries in tables.items():
            if isinstance(entries, str):
                if base_dir is None:
                    raise WitnessError(f"expected table {tname!r} as a list of elements, found text", iwhere)
                parsed[tname] = _load_npy(base_dir, entries, tname, iwhere, limits)
            elif isinstance(entries, list):
                if len(entries) > limits.max_entries:
                    raise limits.refuse(f"table {tname!r} with at most {{limit}} entries", "max_entries",
                                        len(entries), iwhere)
                parsed[tname] = entries
            else:
                raise WitnessError(
                    f"expected table {tname!r} as a list of elements or a .npy path, found {type(entries).__name__}",
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


# ----- fitting the witness to a transcript (pure) -------------------------------------------
def fit_witness(witness: Witness, transcript: Transcript) -> dict[int, FittedInstance]:
    """Transcript instance index -> its witness, matched by name (first unclaimed
    instance of that name), else by position; instances without a witness are absent."""
    claimed: dict[int, WitnessInstance] = {}
    by_name: dict[str, list[int]] = {}
    for inst in transcript.instances:
        by_name.setdefault(inst.name, []).append(inst.start.index)
    unmatched: list[tuple[int, WitnessInstance]] = []
    for pos, winst in enumerate(witness.instances):
        free = [i for i in by_name.get(winst.name, []) if i not in claimed]
        if free:
            claimed[free[0]] = winst
        else:
            unmatched.append((pos, winst))
    for pos, winst in unmatched:
        if pos < len(transcript.instances) and pos not in claimed:
            claimed[pos] = winst
        else:
            names = ", ".join(repr(i.name) for i in transcript.instances[:8]) or "none"
            raise WitnessError(
                f"expected witness instance {winst.name!r} to match a transcript instance by name or position, "
                f"found no free one (transcript instances: {names})", Where(file=witness.source or None))
    field = transcript.field
    return {
        index: _fit_one(field, transcript.instances[index], winst, Where(file=witness.source or None, instance=winst.name))
        for index, winst in sorted(claimed.items())
    }


def _fit_one(field: Field, inst: InstanceRecord, winst: WitnessInstance, where: Where) -> FittedInstance:
    start = inst.start
    expr = winst.combine
    missing = [n for n in expr.names() if n not in winst.tables]
    if missing:
        have = ", ".join(sorted(winst.tables)) or "none"
        raise WitnessError(f"expected tables named in combine {expr.text!r}; missing {', '.join(missing)} "
                           f"(tables given: {have})", where)
    if expr.degree() > start.degree:
        raise WitnessError(
            f"expected a combine of degree at most the instance's degree {start.degree}, "
            f"found {expr.text!r} of degree {expr.degree()}", where)
    n = 1 << start.num_vars
    tables: dict[str, np.ndarray] = {}
    opened = [o.table for o in inst.openings if o.table in winst.tables and o.table not in expr.names()]
    for tname in (*expr.names(), *dict.fromkeys(opened)):  # the combine's tables, then tables only opened
        if len(winst.tables[tname]) != n:  # before any conversion allocates
            raise WitnessError(
                f"expected table {tname!r} with 2^{start.num_vars} = {n} entries (num_vars {start.num_vars}), "
                f"found {len(winst.tables[tname])}", where)
        arr = _to_field_array(field, winst.tables[tname], tname, where)
        if len(arr) != n:
            raise WitnessError(
                f"expected table {tname!r} with 2^{start.num_vars} = {n} entries (num_vars {start.num_vars}), "
                f"found {len(arr)}", where)
        tables[tname] = arr
    return FittedInstance(start.index, start.name, tables, expr, winst.name)


def _to_field_array(field: Field, raw: RawTable, table: str, where: Where) -> np.ndarray:
    """Canonical field vector: 1-D base-field array when every entry is a base
    element, else an (n, k) extension array. A JSON list of integers, of decimal text,
    or of k-lists of them is converted by numpy as a whole; anything else (0x text,
    odd entries) goes element by element through the field's parser, which names
    the first bad entry."""
    if isinstance(raw, np.ndarray):
        return _numpy_table(field, raw, table, where)
    values = list(raw)
    whole = _whole_array(field, values) if values else None
    if whole is not None:
        return _numpy_table(field, whole, table, where)
    elements = []
    for i, v in enumerate(values):
        try:
            elements.append(field.parse(v))
        except FieldError as err:
            raise WitnessError(f"table {table!r} entry {i}: {err.message}", where) from None
    if field.is_extension and any(not field.is_base(e) for e in elements):
        return field.vec(elements)
    return field.base.vec([e if isinstance(e, int) else e[0] for e in elements])


_TO_INT = np.frompyfunc(int, 1, 1)


def _whole_array(field: Field, values: list[Any]) -> np.ndarray | None:
    """``values`` as one integer array (shape (n,) or (n, k)) when numpy can read them all at
    once: machine integers, or plain decimal digits (text); None otherwise."""
    try:
        arr = np.array(values)
    except (ValueError, OverflowError, TypeError):
        if field.p < 2**64:
            return None
        try:  # integers past 2^64 (BN254, BLS12-381): numpy keeps them as Python ints
            arr = np.array(values, dtype=object)
        except (ValueError, TypeError):
            return None
    if arr.ndim not in (1, 2):
        return None
    if arr.dtype.kind in "iu":
        return arr
    if arr.dtype.kind == "U" and arr.size and bool(np.char.isdigit(arr).all()):
        if field.p < 2**64:
            try:
                return arr.astype(np.uint64)
            except (ValueError, OverflowError):
                return None
        if int(np.char.str_len(arr).max()) > len(str(field.p)):
            return None  # longer than any canonical element: the parser names the entry
        return _TO_INT(arr).astype(object)  # type: ignore[no-any-return]
    if arr.dtype.kind == "O" and field.p >= 2**64:
        if not all(v.__class__ is int for v in arr.reshape(-1)[:1]):
            return None
        kinds = np.frompyfunc(lambda v: v.__class__ is int, 1, 1)(arr).astype(bool)
        return arr if bool(kinds.all()) else None
    return None


def _numpy_table(field: Field, arr: np.ndarray, table: str, where: Where) -> np.ndarray:
    k = field.degree
    if arr.ndim == 2 and (not field.is_extension or arr.shape[1] != k):
        raise WitnessError(
            f"expected table {table!r} as shape (n,) or (n, {k}) over {field.describe()}, found shape {arr.shape}",
            where)
    p = field.p
    bad = np.less(arr, 0).astype(bool)
    if p < 2**64:
        bad = bad | (arr.astype(np.uint64) >= np.uint64(p))
    elif arr.dtype == object:
        bad = bad | np.greater_equal(arr, p).astype(bool)
    if bool(np.any(bad)):
        index = int(np.argwhere(bad)[0][0])
        raise WitnessError(
            f"expected canonical entries 0 <= v < p = {p} in table {table!r}, found {arr[index]} at entry {index}",
            where)
    if p >= 2**64:  # object arrays of Python ints for the big fields, shape (n,) or (n, k)
        out = arr if arr.dtype == object else arr.astype(object)
        return np.array(out, dtype=object)
    out = np.ascontiguousarray(arr, dtype=np.uint64)
    return out if out.ndim == 1 else field.vec(out)
