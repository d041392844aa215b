"""The common face of every vector kernel, and the generic algorithms built on
a kernel's add and mul (batch inversion, Horner evaluation, dot product).

A kernel works on numpy arrays of canonical entries: shape (n,) for a prime
field, (n, k) for a degree-k extension. Operations broadcast like numpy (a
scalar held as a 1-entry array times a vector), never mutate their inputs and
never loop in Python over entries.

Large arrays (``compiled_min`` entries or more) go through the numba loops of
:mod:`stepper.field.kernels.compiled`, loaded on first need; small arrays stay on
numpy so that a short CLI run never waits for numba. Setting the environment
variable ``STEPPER_KERNELS=numpy`` keeps every array on numpy. A block of work that
declares its size (:func:`work_of`) stays on numpy below :data:`COMPILED_WORK_MIN`
table entries, where loading numba costs more than it saves.

Loading numba's cached machine code costs a fixed start-up in every process, most of it
in optional packages numba reaches for on its first call: SciPy (for ``np.dot`` and
``np.linalg`` inside compiled code, through ``scipy.linalg``, which also pulls in numpy's
f2py) and cffi (for calling cffi functions from compiled code). None of our loops uses
either, so :func:`load_compiled` holds both back while it imports numba and makes its
first call, where numba falls back to running without them (measured on the development
machine, numba 0.68: 0.82 s -> 0.49 s CPU and 163 MB -> 145 MB resident for that start-up).
The choice is process-wide (compiled code in the same process cannot then use ``np.dot``,
``np.linalg`` or cffi unless SciPy or cffi was imported before), so it is made only where
the environment variable ``STEPPER_LEAN_NUMBA`` is ``1``: the ``stepper`` command sets it
for its own process (and hands the programs it starts the environment without it); a
program that imports stepper as a library keeps numba's usual behaviour.
"""

from __future__ import annotations

import os
import sys
import threading
from abc import ABC, abstractmethod
from contextlib import contextmanager
from importlib.machinery import ModuleSpec
from types import ModuleType
from typing import TYPE_CHECKING, Any, Iterator, Sequence

import numpy as np

from stepper.errors import FieldError

if TYPE_CHECKING:
    from stepper.field.shape import Element, FieldShape

__all__ = ["Kernel", "COMPILED_MIN", "COMPILED_WORK_MIN", "HELD_BACK", "load_compiled", "held_back", "steady_heap",
           "work_of"]

COMPILED_MIN = 1 << 14  # below this numpy wins: numba's first use in a process costs about a second
# table entries a piece of work (the root cause) must reach before loading numba pays for itself
COMPILED_WORK_MIN = 1 << 26

_compiled: ModuleType | None = None
_compiled_tried = False
_compiled_lock = threading.Lock()
_numpy_work = 0  # blocks of work_of() running that keep numba unloaded

HELD_BACK = ("scipy", "cffi")  # optional packages of numba that none of our loops needs (module docstring)


def load_compiled() -> ModuleType | None:
    """The numba loops, loaded and run once, or None when numba is missing or switched off."""
    global _compiled, _compiled_tried
    if not _compiled_tried and not _numpy_work:
        with _compiled_lock:  # the Dask engine's threads may all ask at once
            if not _compiled_tried:
                if os.environ.get("STEPPER_KERNELS", "").lower() != "numpy":
                    try:
                        lean = os.environ.get("STEPPER_LEAN_NUMBA") == "1"
                        with held_back(HELD_BACK if lean else ()):
                            from stepper.field.kernels import compiled

                            compiled.first_call()
                    except (ImportError, OSError):  # numba missing or unusable here: numpy does everything
                        compiled = None  # type: ignore[assignment]
                    _compiled = compiled
                _compiled_tried = True
    return _compiled


@contextmanager
def work_of(entries: int) -> Iterator[None]:
    """A block of vector work over about ``entries`` table entries. Below
    :data:`COMPILED_WORK_MIN` it runs on numpy alone unless numba is loaded already:
    loading numba (its import, its cached machine code, its first call) costs about half a
    second of CPU and 100 MB of resident memory, more than its loops save on that much work
    (``bench/witness.py`` measures both sides; ``STEPPER_KERNELS=compiled`` loads numba for
    any size, to compare). The values are the same either way. The block also asks the heap
    to keep freed memory for reuse (:func:`steady_heap`, process-wide and lasting, as the
    whole-file check asks too): without that the numpy temporaries of the pieces spend most
    of their time in page faults."""
    global _numpy_work
    steady_heap(STEADY_KEEP)
    numpy_only = entries < COMPILED_WORK_MIN and os.environ.get("STEPPER_KERNELS", "").lower() != "compiled"
    with _compiled_lock:
        _numpy_work += numpy_only
    try:
        yield
    finally:
        with _compiled_lock:
            _numpy_work -= numpy_only


class _HeldBack:
    """An import finder that answers "not installed" for the packages named (and their modules)."""

    def __init__(self, packages: Sequence[str]) -> None:
        self.packages = frozenset(packages)

    def find_spec(self, name: str, path: object = None, target: object = None) -> ModuleSpec | None:
        if name.partition(".")[0] in self.packages:
            raise ModuleNotFoundError(f"{name} is held back while the compiled kernels load", name=name)
        return None


@contextmanager
def held_back(packages: Sequence[str]) -> Iterator[None]:
    """Within the block, importing one of ``packages`` that is not imported yet fails as if it
    were not installed; a package already imported stays usable."""
    finder = _HeldBack(packages)
    sys.meta_path.insert(0, finder)  # type: ignore[arg-type]
    try:
        yield
    finally:
        sys.meta_path.remove(finder)  # type: ignore[arg-type]


_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3  # mallopt parameters of glibc's malloc.h
STEADY_KEEP = 64 << 20
_heap_steadied = False


def steady_heap(keep_bytes: int = STEADY_KEEP) -> bool:
    """Ask glibc's malloc to keep up to ``keep_bytes`` of freed memory for reuse (and to
    serve blocks below ``keep_bytes // 16`` from the heap) instead of handing it back to the
    system after each numpy temporary: with its default, dynamic thresholds, kernels on
    arrays of 10^3-10^5 entries spend most of their time in page faults (measured: a
    Goldilocks multiply of 2^14 entries 3x slower). Process-wide and idempotent; False
    where there is no glibc (nothing changes there)."""
    global _heap_steadied
    if _heap_steadied:
        return True
    try:
        import ctypes

        libc = ctypes.CDLL("libc.so.6")
        ok = bool(libc.mallopt(_M_MMAP_THRESHOLD, keep_bytes // 16)) and bool(libc.mallopt(_M_TRIM_THRESHOLD, keep_bytes))
    except (OSError, AttributeError):
        return False
    _heap_steadied = ok
    return ok


class Kernel(ABC):
    """Arithmetic on vectors of one field."""

    dtype: Any

    def __init__(self, field: FieldShape, compiled_min: int = COMPILED_MIN) -> None:
        self.field = field
        self.p = field.p
        self.compiled_min = compiled_min

    # ----- construction and conversion -------------------------------------------
    @abstractmethod
    def array(self, values: Any) -> np.ndarray:
        """A canonical array from elements or an existing array (checked, copied
        only when the dtype changes); raises FieldError naming the first bad entry."""

    def to_list(self, a: np.ndarray) -> list[Element]:
        return [int(x) for x in a]

    def zeros(self, n: int) -> np.ndarray:
        return np.zeros(n, dtype=self.dtype)

    def random(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return self.array([int(x) for x in rng.integers(0, self.p, size=n, dtype=np.uint64)])

    def scalar_array(self, s: Element) -> np.ndarray:
        return self.array([s])

    def _use_compiled(self, a: Any, b: Any = None) -> ModuleType | None:
        size = max(np.shape(a)[0] if np.ndim(a) else 1, np.shape(b)[0] if b is not None and np.ndim(b) else 1)
        return load_compiled() if size >= self.compiled_min else None

    # ----- arithmetic ---------------------------------------------------------------
    def add(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return (a + b) % self.p

    def sub(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return (a + (self.p - b)) % self.p

    def neg(self, a: np.ndarray) -> np.ndarray:
        return (self.p - a) % self.p

    def mul(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return (a * b) % self.p

    def scale(self, a: np.ndarray, s: Element) -> np.ndarray:
        return self.mul(a, self.scalar_array(s)[0])

    def sum(self, a: np.ndarray) -> Element:
        return int(sum(int(x) for x in np.asarray(a, dtype=object))) % self.p if len(a) else 0

    def dot(self, a: np.ndarray, b: np.ndarray) -> Element:
        return self.sum(self.mul(a, b))

    def inv(self, a: np.ndarray) -> np.ndarray:
        """Montgomery's batch inversion by a product tree (log-depth numpy passes):
        one field inversion and about 3n multiplications."""
        n = len(a)
        if n == 0:
            return a.copy()
        one = self.array([self.field.one])
        levels = [a]
        while len(levels[-1]) > 1:
            cur = levels[-1]
            if len(cur) % 2:
                cur = np.concatenate([cur, one])
            levels.append(self.mul(cur[0::2], cur[1::2]))
        root = self.to_list(levels[-1])[0]
        if self.field.is_zero(root):
            index = self._first_zero(a)
            raise FieldError(f"expected every entry to be non-zero for batch inversion, found 0 at index {index}")
        inv = self.array([self.field.inv(root)])
        for level in reversed(levels[:-1]):
            cur = level
            if len(cur) % 2:
                cur = np.concatenate([cur, one])
            out = np.empty_like(cur)
            out[0::2] = self.mul(inv, cur[1::2])
            out[1::2] = self.mul(inv, cur[0::2])
            inv = out[: len(level)]
        return inv

    def _first_zero(self, a: np.ndarray) -> int:
        zero = a == 0 if a.ndim == 1 else np.all(a == 0, axis=1)
        return int(np.flatnonzero(zero)[0])

    def poly_eval(self, coeffs: list[Element], xs: np.ndarray) -> np.ndarray:
        """sum coeffs[i] x^i at every entry x of xs, by Horner's rule."""
        acc = self.zeros(len(xs))
        for c in reversed(coeffs):
            acc = self.add(self.mul(acc, xs), self.scalar_array(c))
        return acc
