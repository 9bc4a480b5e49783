"""Building a plant from numpy arrays, the way a script has them."""

from __future__ import annotations

import numpy as np

__all__ = ["plant_from_arrays"]


def plant_from_arrays(A, B, C=None, D=None, *, sample_time=None, **details):
    """A validated :class:`gainboard.core.Plant` from the matrices of x' = Ax + Bu, y = Cx + Du.

    Shapes are forgiving where only one reading makes sense: a 1-D ``B`` of length n is
    the column of a one-input plant, a 1-D ``C`` of length n is the row of a one-output
    plant, and a scalar or 1-D ``D`` is reshaped to (p, m).

    Parameters
    ----------
    A : array_like, shape (n, n)
        State matrix.
    B : array_like, shape (n, m) or (n,)
        Input matrix; 1-D means one input.
    C : array_like, shape (p, n) or (n,), optional
        Output matrix; every state is measured (identity) when omitted.
    D : array_like, shape (p, m), scalar or 1-D, optional
        Feedthrough; zeros when omitted.
    sample_time : float, optional
        Sampling period in seconds of a sampled plant x[k+1] = Ax[k] + Bu[k];
        ``None`` (default) for continuous time.
    **details
        Any other field of :class:`gainboard.core.Plant`: ``name``, ``state_names``,
        ``input_limits``, ``tracked_outputs`` (0-based output indices), ``specs``, ...

    Returns
    -------
    gainboard.core.Plant

    Raises
    ------
    gainboard.core.PlantError
        When the shapes do not fit together or a number is not finite; the message says which.

    Examples
    --------
    >>> plant = plant_from_arrays([[0.0, 1.0], [0.0, 0.0]], [0.0, 1.0], name="double integrator")
    >>> plant.B.shape, plant.input_count
    ((2, 1), 1)
    """
    from gainboard.core import Plant

    A = np.asarray(A)
    B = np.asarray(B)
    if B.ndim == 1:
        B = B.reshape(-1, 1)
    if C is not None:
        C = np.asarray(C)
        if C.ndim == 1:
            C = C.reshape(1, -1)
    if D is not None:
        D = np.asarray(D)
        if D.ndim < 2:
            outputs = C.shape[0] if C is not None else (A.shape[0] if A.ndim == 2 else 0)
            D = D.reshape(outputs, B.shape[1]) if D.size == outputs * B.shape[1] else D
    return Plant(A=A, B=B, C=C, D=D, sample_time=sample_time, **details)
