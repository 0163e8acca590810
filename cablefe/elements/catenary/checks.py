"""Input checks shared by the catenary functions: per-element arrays, cable
properties, point arrays and the inner solver's settings.

Every public catenary function validates its arguments here, so that a bad
array fails with one message naming the argument, before any numerics.
"""
from __future__ import annotations

import numpy as np


def _vector(name, value, n=None):
    """Finite float array of shape (n,) from a scalar or (n,) input (a read-only view: never written)."""
    arr = np.asarray(value, dtype=float)
    if arr.ndim > 1:
        raise ValueError(f"{name} must be a scalar or a 1-D array per element, got shape {arr.shape}")
    if n is not None:
        if arr.ndim == 1 and arr.shape[0] not in (1, n):
            raise ValueError(f"{name} has {arr.shape[0]} entries, expected {n} (one per element)")
        arr = np.broadcast_to(arr, (n,))
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} must be finite, got {arr[~np.isfinite(arr)][:3]}")
    return arr


def _batch_size(*values):
    sizes = {np.asarray(v).shape[0] for v in values if np.ndim(v) == 1}
    if len(sizes) > 1:
        raise ValueError(f"per-element arrays have different lengths {sorted(sizes)}")
    return sizes.pop() if sizes else 1


def _check_cable(L0, weight, EA):
    if np.any(L0 <= 0.0):
        raise ValueError(f"unstressed_length must be > 0 m, got {L0[L0 <= 0.0][:3]}")
    if np.any(weight < 0.0):
        raise ValueError(f"weight must be >= 0 N/m, got {weight[weight < 0.0][:3]}")
    if np.any(EA <= 0.0):
        raise ValueError(f"EA must be > 0 N, got {EA[EA <= 0.0][:3]}")


def _points(name, value):
    arr = np.asarray(value, dtype=float)
    if arr.ndim != 2 or arr.shape[1] != 3:
        raise ValueError(f"{name} must have shape (n, 3), got {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} must be finite")
    return arr


def _cable_arrays(unstressed_length, weight, EA, n):
    """Validated (n,) unstressed length L0 (m), weight (N/m) and EA (N) of n cables."""
    L0, weight, EA = (_vector("unstressed_length", unstressed_length, n), _vector("weight", weight, n),
                      _vector("EA", EA, n))
    _check_cable(L0, weight, EA)
    return L0, weight, EA


def _pair_and_cable(first, second, unstressed_length, weight, EA):
    """Validated (n,) arrays of two per-element quantities and of the cable.

    ``first`` and ``second`` are ``(name, value)`` pairs (the end forces H, V
    or the chord l, h); n is the common length of the 1-D arguments.  Returns
    ``a, b, L0, weight, EA``.
    """
    (name_a, a), (name_b, b) = first, second
    n = _batch_size(a, b, unstressed_length, weight, EA)
    a, b = _vector(name_a, a, n), _vector(name_b, b, n)
    return (a, b) + _cable_arrays(unstressed_length, weight, EA, n)


def _nonnegative(name, arr, unit):
    if np.any(arr < 0.0):
        raise ValueError(f"{name} must be >= 0 {unit}, got {arr[arr < 0.0][:3]}")


def _check_solver(guess, n, tol, max_iter):
    if not (tol > 0.0) or int(max_iter) < 1:
        raise ValueError(f"need tol > 0 and max_iter >= 1, got tol={tol}, max_iter={max_iter}")
    if guess is not None:
        try:
            Hw, Vw = guess
            np.broadcast_to(np.asarray(Hw, dtype=float), (n,))
            np.broadcast_to(np.asarray(Vw, dtype=float), (n,))
        except (TypeError, ValueError) as err:
            raise ValueError(f"guess must be a pair (H, V) of arrays with {n} entries each") from err

