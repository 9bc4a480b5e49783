"""The plant model: a checked state-space system with names, units and limits.

A :class:`Plant` is the single validated form of user input. Everything in the
core takes a ``Plant`` (or arrays derived from it) and never mutates it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import scipy.linalg

from ._arrays import read_only
from ._errors import PlantError
from ._noise import NoiseIntensities, sampled_noise_intensities

__all__ = [
    "Plant",
    "as_real_matrix",
    "plant_from_transfer_function",
    "discretize_zero_order_hold",
]


def _frozen(array) -> np.ndarray:
    """A read-only float copy, so a frozen Plant is really frozen."""
    return read_only(array, dtype=float)


def _describe_shape(value) -> str:
    """A short human description of the shape of a nested list or array."""
    try:
        arr = np.asarray(value, dtype=object)
    except ValueError:  # ragged input that numpy refuses outright
        return "ragged rows"
    if arr.ndim == 2:
        return f"{arr.shape[0]}×{arr.shape[1]}"
    if arr.ndim == 1:
        lengths = {len(row) if isinstance(row, (list, tuple)) else -1 for row in value}
        if len(lengths) > 1 and -1 not in lengths:
            return "ragged rows (rows of different lengths)"
        return f"a flat list of {arr.shape[0]} numbers"
    if arr.ndim == 0:
        return "a single number"
    return f"a {arr.ndim}-dimensional array"


def as_real_matrix(value, key: str, expected: str) -> np.ndarray:
    """Turn user data into a finite real 2-D float array, or explain why not.

    Parameters
    ----------
    value : array_like
        Nested list of rows (as read from a plant file) or an array.
    key : str
        Name of the matrix for the message, e.g. ``"B"``.
    expected : str
        Expected shape in words for the message, e.g. ``"2×m"``.

    Returns
    -------
    numpy.ndarray
        2-D float array (a new copy).

    Raises
    ------
    PlantError
        For strings, ragged rows, empty matrices, non-2-D data, booleans or
        non-finite numbers.
    """
    if isinstance(value, (str, bytes)):
        raise PlantError(f"{key} must be a matrix of numbers ({expected}), but a string was given")
    if isinstance(value, np.ndarray):
        raw = value
    else:
        if not isinstance(value, (list, tuple)):
            raise PlantError(
                f"{key} must be written as a list of rows such as [[1.0, 2.0]] ({expected}), "
                f"but {type(value).__name__} {value!r} was given"
            )
        rows = list(value)
        if rows and not all(isinstance(row, (list, tuple, np.ndarray)) for row in rows):
            raise PlantError(
                f"{key} must be a list of rows such as [[1.0, 2.0]] ({expected}), "
                f"but {_describe_shape(rows)} was given"
            )
        lengths = {len(row) for row in rows}
        if len(lengths) > 1:
            raise PlantError(
                f"{key} has rows of different lengths {sorted(lengths)}; every row must have "
                f"the same number of entries ({expected})"
            )
        for row in rows:
            for entry in row:
                if isinstance(entry, bool) or not isinstance(entry, (int, float, np.number)):
                    raise PlantError(
                        f"{key} contains {entry!r}, which is not a real number; "
                        f"write every entry as a number ({expected})"
                    )
        raw = np.array(rows, dtype=float) if rows else np.zeros((0, 0))
    if raw.dtype.kind == "c":
        raise PlantError(f"{key} contains complex numbers; a plant matrix must be real ({expected})")
    if raw.dtype.kind not in "fiu":
        raise PlantError(f"{key} must contain real numbers only ({expected})")
    if raw.ndim != 2:
        raise PlantError(f"{key} must be 2-D ({expected}), but has {raw.ndim} dimension(s)")
    if raw.size == 0:
        raise PlantError(f"{key} is empty (shape {raw.shape[0]}×{raw.shape[1]}); expected {expected}")
    matrix = np.array(raw, dtype=float)
    if not np.all(np.isfinite(matrix)):
        bad = tuple(int(i) + 1 for i in np.argwhere(~np.isfinite(matrix))[0])
        raise PlantError(
            f"{key} has a non-finite entry (inf or nan) at row {bad[0]}, column {bad[1]}; "
            "every entry must be a finite number"
        )
    return matrix


def _check_shape(matrix: np.ndarray, key: str, rows: int | None, cols: int | None, expected: str):
    found_rows, found_cols = matrix.shape
    if (rows is not None and found_rows != rows) or (cols is not None and found_cols != cols):
        raise PlantError(f"{key} is {found_rows}×{found_cols} but must be {expected}")


def _names(values, count: int, what: str, default_prefix: str) -> tuple[str, ...]:
    if values is None:
        return tuple(f"{default_prefix}{i + 1}" for i in range(count))
    values = tuple(values)
    if len(values) != count or not all(isinstance(v, str) for v in values):
        raise PlantError(f"{what} must be a list of {count} strings, but {list(values)!r} was given")
    if default_prefix and len(set(values)) != len(values):
        # Names identify states, inputs and outputs (tracked outputs, exports): they must differ.
        repeated = sorted({v for v in values if values.count(v) > 1})
        raise PlantError(f"{what} must all differ, but {repeated} appear more than once; rename them")
    return values


@dataclass(frozen=True, eq=False)
class Plant:
    """A linear plant x' = Ax + Bu (or x[k+1] = Ax[k] + Bu[k]), y = Cx + Du.

    Build it with keyword arguments; every field is validated on creation and
    the matrices are stored as read-only float arrays.

    Parameters
    ----------
    A : array_like, shape (n, n)
        State matrix.
    B : array_like, shape (n, m)
        Input matrix.
    C : array_like, shape (p, n), optional
        Output matrix; the identity (every state measured) when omitted.
    D : array_like, shape (p, m), optional
        Feedthrough; zeros when omitted.
    sample_time : float or None
        Sampling period in seconds for a sampled plant; ``None`` for continuous time.
    name, summary, description : str
        Title, one-line summary, and full explanation (physics, assumptions).
    state_names, state_units, input_names, input_units, output_names, output_units : tuple of str
        Labels; default names are ``x1..xn``, ``u1..um``, ``y1..yp``; units default to "".
    input_limits : tuple of (low, high) pairs or None
        Actuator range of each input, in the input's units. ``None`` means unlimited.
    initial_state : array_like, shape (n,), optional
        Starting state for the regulation (initial-condition) response.
    tracked_outputs : tuple of int
        Zero-based indices of the outputs that a reference step should drive to the
        reference with zero steady-state error (at most m of them).
    disturbance_matrix : array_like, shape (n, q), optional
        Where a disturbance enters the state equation; the input matrix B
        (an input disturbance on every actuator) when omitted.
    disturbance_names, disturbance_units : tuple of str
        Labels of the disturbance channels.
    disturbance_step : tuple of float
        Size of the step applied on each disturbance channel in the disturbance response.
    specs : object, optional
        Suggested design specifications (a :class:`gainboard.core.DesignSpecs`).
    noise : NoiseIntensities, optional
        Process- and measurement-noise intensities (covariances for a sampled plant)
        for estimator design; see :mod:`gainboard.core._noise`.

    Examples
    --------
    >>> plant = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> plant.state_count, plant.input_count, plant.output_count, plant.is_sampled
    (2, 1, 2, False)
    """

    A: np.ndarray
    B: np.ndarray
    C: np.ndarray | None = None
    D: np.ndarray | None = None
    sample_time: float | None = None
    name: str = "plant"
    summary: str = ""
    description: str = ""
    state_names: tuple[str, ...] | None = None
    state_units: tuple[str, ...] | None = None
    input_names: tuple[str, ...] | None = None
    input_units: tuple[str, ...] | None = None
    output_names: tuple[str, ...] | None = None
    output_units: tuple[str, ...] | None = None
    input_limits: tuple[tuple[float, float], ...] | None = None
    initial_state: np.ndarray | None = None
    tracked_outputs: tuple[int, ...] | None = None
    disturbance_matrix: np.ndarray | None = None
    disturbance_names: tuple[str, ...] | None = None
    disturbance_units: tuple[str, ...] | None = None
    disturbance_step: tuple[float, ...] | None = None
    specs: object | None = field(default=None)
    noise: NoiseIntensities | None = None

    def __post_init__(self):
        set_ = lambda key, value: object.__setattr__(self, key, value)  # noqa: E731
        A = as_real_matrix(self.A, "A", "n×n")
        n = A.shape[0]
        _check_shape(A, "A", n, n, "square (n×n)")
        B = as_real_matrix(self.B, "B", f"{n}×m")
        if B.shape[0] != n:
            raise PlantError(f"B has {B.shape[0]} rows but A is {n}×{n}; B must be {n}×m")
        m = B.shape[1]
        C = np.eye(n) if self.C is None else as_real_matrix(self.C, "C", f"p×{n}")
        if C.shape[1] != n:
            raise PlantError(f"C has {C.shape[1]} columns but A is {n}×{n}; C must be p×{n}")
        p = C.shape[0]
        D = np.zeros((p, m)) if self.D is None else as_real_matrix(self.D, "D", f"{p}×{m}")
        _check_shape(D, "D", p, m, f"{p}×{m} (outputs × inputs)")
        for key, value in (("A", A), ("B", B), ("C", C), ("D", D)):
            set_(key, _frozen(value))

        if self.sample_time is not None:
            T = self.sample_time
            if isinstance(T, bool) or not isinstance(T, (int, float, np.floating, np.integer)):
                raise PlantError(f"sample_time must be a number of seconds, but {T!r} was given")
            if not (math.isfinite(T) and T > 0):
                raise PlantError(f"sample_time must be a positive finite number of seconds, but is {T!r}")
            set_("sample_time", float(T))

        set_("state_names", _names(self.state_names, n, "state names", "x"))
        set_("state_units", _names(self.state_units, n, "state units", "") if self.state_units else ("",) * n)
        set_("input_names", _names(self.input_names, m, "input names", "u"))
        set_("input_units", _names(self.input_units, m, "input units", "") if self.input_units else ("",) * m)
        set_("output_names", _names(self.output_names, p, "output names", "y"))
        set_("output_units", _names(self.output_units, p, "output units", "") if self.output_units else ("",) * p)

        if self.input_limits is not None:
            limits = tuple(tuple(pair) for pair in self.input_limits)
            if len(limits) != m:
                raise PlantError(f"input limits must give one (low, high) pair per input: {m} expected, {len(limits)} given")
            checked = []
            for name, pair in zip(self.input_names, limits):
                if len(pair) != 2 or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in pair):
                    raise PlantError(f"the limit of input '{name}' must be a (low, high) pair of numbers, got {pair!r}")
                low, high = float(pair[0]), float(pair[1])
                if not (low < high) or math.isnan(low) or math.isnan(high):
                    raise PlantError(f"the limit of input '{name}' needs low < high, got ({low}, {high})")
                if not (low <= 0.0 <= high):
                    raise PlantError(
                        f"the limit of input '{name}' ({low}, {high}) must contain 0, because u = -Kx is zero at rest"
                    )
                checked.append((low, high))
            set_("input_limits", tuple(checked))

        if self.initial_state is not None:
            x0 = np.asarray(self.initial_state, dtype=float).reshape(-1)
            if x0.shape != (n,) or not np.all(np.isfinite(x0)):
                raise PlantError(f"the initial state must be {n} finite numbers, one per state, got {list(np.ravel(self.initial_state))!r}")
            set_("initial_state", _frozen(x0))

        tracked = tuple(range(min(m, p))) if self.tracked_outputs is None else tuple(int(i) for i in self.tracked_outputs)
        if len(tracked) == 0 or len(tracked) > m or len(set(tracked)) != len(tracked) or any(not 0 <= i < p for i in tracked):
            raise PlantError(
                f"tracked outputs must be 1 to {m} distinct outputs out of {p} (one per input at most), got {tracked!r}"
            )
        set_("tracked_outputs", tracked)

        explicit_disturbance = self.disturbance_matrix is not None
        E = B if not explicit_disturbance else as_real_matrix(self.disturbance_matrix, "disturbance matrix", f"{n}×q")
        if E.shape[0] != n:
            raise PlantError(f"the disturbance matrix has {E.shape[0]} rows but must have {n} (one per state)")
        set_("disturbance_matrix", _frozen(E))
        q = E.shape[1]
        default_names = None if explicit_disturbance else self.input_names
        set_("disturbance_names", _names(self.disturbance_names or default_names, q, "disturbance names", "d"))
        default_units = ("",) * q if explicit_disturbance else self.input_units
        set_("disturbance_units", _names(self.disturbance_units or default_units, q, "disturbance units", ""))
        step = (1.0,) * q if self.disturbance_step is None else tuple(float(v) for v in self.disturbance_step)
        if len(step) != q or not all(math.isfinite(v) for v in step):
            raise PlantError(f"the disturbance step must give {q} finite numbers, one per disturbance channel, got {step!r}")
        set_("disturbance_step", step)

        if self.noise is not None:
            if not isinstance(self.noise, NoiseIntensities):
                raise PlantError(f"noise must be NoiseIntensities (see noise_intensities), got {type(self.noise).__name__}")
            if self.noise.state_count != n or self.noise.output_count != p:
                raise PlantError(
                    f"the noise intensities are for {self.noise.state_count} states and {self.noise.output_count} "
                    f"outputs, but the plant has {n} states and {p} outputs; give W as {n}×{n} and V as {p}×{p}"
                )

    # -- sizes -------------------------------------------------------------
    @property
    def state_count(self) -> int:
        """Number of states n."""
        return self.A.shape[0]

    @property
    def input_count(self) -> int:
        """Number of inputs m."""
        return self.B.shape[1]

    @property
    def output_count(self) -> int:
        """Number of outputs p."""
        return self.C.shape[0]

    @property
    def is_sampled(self) -> bool:
        """True for a sampled (discrete-time) plant."""
        return self.sample_time is not None

    def with_changes(self, **changes) -> "Plant":
        """Return a copy with some fields replaced (and validated again)."""
        return replace(self, **changes)

    def check_gain(self, gain) -> np.ndarray:
        """Validate a feedback gain K of shape (m, n) for this plant and return it as floats.

        Raises
        ------
        GainError
            If K is not a finite real m×n matrix.
        """
        from ._errors import GainError

        m, n = self.input_count, self.state_count
        try:
            K = np.array(gain, dtype=float)
        except (TypeError, ValueError):
            raise GainError(f"K must be a {m}×{n} matrix of numbers (inputs × states), got {gain!r}") from None
        if K.ndim == 1 and m == 1:
            K = K.reshape(1, -1)
        if K.shape != (m, n):
            found = "×".join(str(s) for s in K.shape) or "a single number"
            raise GainError(f"K is {found} but must be {m}×{n} (one row per input, one column per state)")
        if not np.all(np.isfinite(K)):
            raise GainError("K has a non-finite entry (inf or nan); every gain must be a finite number")
        return K


def plant_from_transfer_function(numerator, denominator, sample_time=None, **metadata) -> Plant:
    """Build a single-input single-output plant from transfer-function coefficients.

    The realisation is the controllable canonical form returned by
    :func:`scipy.signal.tf2ss` (coefficients in descending powers of s or z).

    Parameters
    ----------
    numerator, denominator : sequence of float
        Polynomial coefficients, highest power first. The transfer function must be
        proper (numerator degree at most the denominator degree).
    sample_time : float, optional
        Makes the plant sampled (coefficients in powers of z).
    **metadata
        Further :class:`Plant` fields (name, units, ...).

    Examples
    --------
    >>> plant = plant_from_transfer_function([1.0], [1.0, 3.0, 2.0])
    >>> sorted(np.linalg.eigvals(plant.A).real.tolist())
    [-2.0, -1.0]
    """
    import scipy.signal

    num = np.atleast_1d(np.asarray(numerator, dtype=float))
    den = np.atleast_1d(np.asarray(denominator, dtype=float))
    if num.ndim != 1 or den.ndim != 1 or not np.all(np.isfinite(num)) or not np.all(np.isfinite(den)):
        raise PlantError("numerator and denominator must be flat lists of finite coefficients")
    den = np.trim_zeros(den, "f")
    num = np.trim_zeros(num, "f")
    if den.size < 2:
        raise PlantError("the denominator must have degree 1 or more (a plant needs at least one state)")
    if num.size == 0:
        raise PlantError("the numerator is zero; the plant would have no effect on its output")
    if num.size > den.size:
        raise PlantError(
            f"the transfer function is improper (numerator degree {num.size - 1} > denominator degree "
            f"{den.size - 1}); a state-space plant needs numerator degree ≤ denominator degree"
        )
    A, B, C, D = scipy.signal.tf2ss(num, den)
    return Plant(A=A, B=B, C=C, D=D, sample_time=sample_time, **metadata)


def discretize_zero_order_hold(plant: Plant, sample_time: float) -> Plant:
    """Sample a continuous plant through a zero-order hold (ZOH).

    Uses the block-matrix exponential exp([[A, B], [0, 0]] T) = [[Φ, Γ], [0, I]],
    which is exact for inputs held constant over each period (Van Loan's method).
    C and D are unchanged, the disturbance matrix is sampled the same way, and
    noise intensities become covariances per sample (:func:`sampled_noise_intensities`).

    Parameters
    ----------
    plant : Plant
        A continuous-time plant.
    sample_time : float
        Sampling period T in seconds (> 0).

    Returns
    -------
    Plant
        The sampled plant with ``sample_time`` set.

    Examples
    --------
    >>> double_integrator = Plant(A=[[0.0, 1.0], [0.0, 0.0]], B=[[0.0], [1.0]])
    >>> sampled = discretize_zero_order_hold(double_integrator, 0.1)
    >>> np.round(sampled.B.ravel(), 6).tolist()
    [0.005, 0.1]
    """
    if plant.is_sampled:
        raise PlantError(f"'{plant.name}' is already sampled (T = {plant.sample_time} s); sample a continuous plant")
    if isinstance(sample_time, bool) or not isinstance(sample_time, (int, float)) or not (
        math.isfinite(sample_time) and sample_time > 0
    ):
        raise PlantError(f"the sample time must be a positive number of seconds, got {sample_time!r}")
    n = plant.state_count
    inputs = np.hstack([plant.B, plant.disturbance_matrix])
    k = inputs.shape[1]
    block = np.zeros((n + k, n + k))
    block[:n, :n] = plant.A
    block[:n, n:] = inputs
    exponential = scipy.linalg.expm(block * sample_time)
    Phi = exponential[:n, :n]
    Gamma = exponential[:n, n:]
    m = plant.input_count
    explicit_disturbance = plant.disturbance_matrix is not plant.B and not np.array_equal(
        plant.disturbance_matrix, plant.B
    )
    return replace(
        plant,
        A=Phi,
        B=Gamma[:, :m],
        disturbance_matrix=Gamma[:, m:] if explicit_disturbance else None,
        sample_time=float(sample_time),
        noise=None if plant.noise is None else sampled_noise_intensities(plant.noise, plant.A, float(sample_time)),
        name=f"{plant.name} (ZOH, T = {sample_time:g} s)",
    )
