"""Dense LU factorisation with partial pivoting for the small iteration matrices.

References
----------
.. [1] Golub, G. H. and Van Loan, C. F., "Matrix Computations", 4th ed., Johns
   Hopkins 2013, section 3.4 (Gaussian elimination with partial pivoting).
"""

from __future__ import annotations

import math

import numpy as np

from speciakin.simulation.jit_options import leaf_kernel


@leaf_kernel(inline="always")
def lu_factor(a, piv):
    """In-place LU with partial pivoting; returns False when singular.

    The diagonal of ``a`` receives the reciprocals of U's pivots (so that
    :func:`lu_solve` multiplies instead of dividing); below it, L's
    multipliers; above it, the rest of U.
    """
    n = a.shape[0]
    for k in range(n):
        p = k
        big = abs(a[k, k])
        for i in range(k + 1, n):
            if abs(a[i, k]) > big:
                big = abs(a[i, k])
                p = i
        piv[k] = p
        if big == 0.0 or not math.isfinite(big):
            return False
        if p != k:
            for j in range(n):
                tmp = a[k, j]
                a[k, j] = a[p, j]
                a[p, j] = tmp
        inv = 1.0 / a[k, k]
        a[k, k] = inv
        for i in range(k + 1, n):
            a[i, k] *= inv
            f = a[i, k]
            if f != 0.0:
                for j in range(k + 1, n):
                    a[i, j] -= f * a[k, j]
    return True


@leaf_kernel(inline="always")
def lu_solve(a, piv, b):
    """Solve in place with the factors of :func:`lu_factor`."""
    n = a.shape[0]
    for k in range(n):
        p = piv[k]
        if p != k:
            tmp = b[k]
            b[k] = b[p]
            b[p] = tmp
    for i in range(n):
        s = b[i]
        for j in range(i):
            s -= a[i, j] * b[j]
        b[i] = s
    # i runs n-1 .. 0 as an unsigned integer, so that no negative-index fix-up is compiled in
    un = np.uint64(n)
    one = np.uint64(1)
    for back in range(n):
        i = un - one - np.uint64(back)
        s = b[i]
        for j in range(i + one, un):
            s -= a[i, j] * b[j]
        b[i] = s * a[i, i]
