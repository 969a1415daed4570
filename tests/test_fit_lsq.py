"""The inner least squares' one-entry memo (``fit.lsq.remember_last``)."""

import numpy as np

from jjpattern.fit.lsq import remember_last


def test_the_memo_computes_once_per_point_and_hands_out_copies():
    calls = []

    @remember_last
    def residual(v):
        calls.append(v.copy())
        return np.array([v[0] * 2.0, v[1] - 1.0])

    a = residual(np.array([1.0, 3.0]))
    a *= 10.0  # a solver that rescales what it is given (scipy 1.14's trust-region does)
    b = residual(np.array([1.0, 3.0]))
    assert b.tolist() == [2.0, 2.0] and len(calls) == 1
    assert residual(np.array([1.0, 3.5])).tolist() == [2.0, 2.5] and len(calls) == 2
