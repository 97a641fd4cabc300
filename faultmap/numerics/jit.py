"""Shared numba setup for faultmap's compiled kernels.

Each compiled kernel lives beside the array code it mirrors, in a module
named after it with ``_jit`` appended (``faultmap/throw/profiles_jit.py``
beside ``faultmap/throw/profiles.py``, ``faultmap/io/dem_jit.py`` beside
``faultmap/io/dem.py``...). The array code stays the reference
implementation and runs instead when numba cannot be imported or
``FAULTMAP_NO_JIT=1`` is set (:data:`ENABLED` is then ``False``).

This module holds what they share:

* :data:`ENABLED`: whether the kernels are compiled;
* :func:`_jit`: the decorator of every kernel (numba's ``njit``, cached on
  disk, GIL released, numpy's floating-point error model); without numba
  it returns the function unchanged;
* :func:`compiled_on_disk`: whether numba's on-disk cache already holds
  some kernels;
* :func:`_sort_small`: insertion sort of a short row, used by several
  kernels.

Compilation happens once per environment (numba's on-disk cache, one per
kernel module); the first call in a new environment takes several seconds.
Numba checks a cached kernel against its own module's source file only:
after editing a kernel here, remove the ``__pycache__`` numba files
(``*.nbi``, ``*.nbc``) of the modules that call it.
"""

from __future__ import annotations

import os
from collections.abc import Iterable

__all__ = ["ENABLED", "compiled_on_disk"]

try:  # pragma: no cover - exercised by whichever environment runs the tests
    if os.environ.get("FAULTMAP_NO_JIT", "") not in ("", "0"):
        raise ImportError("disabled by FAULTMAP_NO_JIT")
    import numba as _nb

    ENABLED = True
except ImportError:  # pragma: no cover
    _nb = None
    ENABLED = False


def compiled_on_disk(kernels: Iterable) -> bool | None:
    """Whether numba's on-disk cache already holds the compiled code of ``kernels``.

    Parameters
    ----------
    kernels : iterable of functions
        Kernels made by :func:`_jit`.

    Returns
    -------
    bool or None
        ``False`` means the next call compiles some of them; ``None`` when
        it cannot tell (numba's cache layout is not a public interface).
        Always ``True`` when the kernels are disabled.
    """
    if _nb is None:
        return True
    try:
        for fn in kernels:
            if not fn._cache._cache_file._load_index():
                return False
        return True
    except Exception:  # pragma: no cover - another numba version
        return None


def _jit(fn):
    if _nb is None:  # pragma: no cover
        return fn
    return _nb.njit(cache=True, nogil=True, error_model="numpy")(fn)


@_jit
def _sort_small(buf, c):  # pragma: no cover
    """Sort buf[:c] in place by insertion (short rows: measured faster than a selection up to ~50 values)."""
    for a in range(1, c):
        v = buf[a]
        b = a - 1
        while b >= 0 and buf[b] > v:
            buf[b + 1] = buf[b]
            b -= 1
        buf[b + 1] = v
