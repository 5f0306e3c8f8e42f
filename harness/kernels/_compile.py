"""numba, when it imports, and the one set of compile options every kernel uses."""

try:  # numba is a declared dependency, but the numpy path keeps working without it
    import numba
except Exception:  # pragma: no cover - exercised only where numba is missing
    numba = None

# error_model="numpy": float division follows IEEE (as the numpy twins do) instead of
# raising ZeroDivisionError, and so loops with divisions vectorise.
jit = numba.njit(cache=True, nogil=True, error_model="numpy") if numba is not None else None
