"""Stability verdicts and single-input loop margins for stacks of closed loops at once.

Monte Carlo sampling judges one K on many models; doing it one model at a time through the
single-model functions would spend its time in Python, not in LAPACK. Here a stack of N
closed-loop matrices goes through one batched ``numpy.linalg.eigvals`` call, and the margins
of N single-input loops through batched polynomial root finding.

Margins, single input. With a(s) = det(sI − A) and c(s) = det(sI − A + BK), the loop
L = K(sI − A)⁻¹B equals b/a with b = c − a (since c = a·(1 + L)). The loop with gain factor
α, a + αb, has a pole on the imaginary axis at s = jω exactly where Im(a(jω)·conj b(jω)) = 0,
with α = −a(jω)/b(jω); |L(jω)| = 1 exactly where |b(jω)|² − |a(jω)|² = 0. Both are real
polynomials in ω, whose roots are the eigenvalues of companion matrices — one batched call
per polynomial degree present. A sampled loop is mapped to the same form by the bilinear
substitution z = (1 + w)/(1 − w), which takes the unit circle onto the imaginary axis
(w = j·tan(θ/2)); the Nyquist point z = −1 is checked on its own. The definitions of the gain
and phase margins are those of :func:`gainboard.core.loop_margins`.
"""

from __future__ import annotations

import numpy as np

from ._stability import decide_stability_of_stack

__all__: list[str] = []  # private: the public face is gainboard.core's Monte Carlo functions

_EPS = np.finfo(float).eps
#: A root whose imaginary part is below this (relative to 1 + |root|) is taken as real.
_REAL_ROOT_TOLERANCE = 1e-7
#: Coefficients below this fraction of the largest are taken as zero when finding a degree.
_LEADING_TOLERANCE = 1e3 * _EPS


def stability_verdicts(closed_loops: np.ndarray, sample_time: float | None):
    """Poles, stability margin and verdict of each closed loop of a stack.

    Parameters
    ----------
    closed_loops : ndarray, shape (N, n, n)
        A − BK per sample.
    sample_time : float or None
        ``None`` for continuous loops (boundary: the imaginary axis), else sampled (unit circle).

    Returns
    -------
    poles : ndarray, shape (N, n), complex
    margin : ndarray, shape (N,)
        −max Re s (continuous) or 1 − max |z| (sampled); positive means stable.
    verdict : ndarray of int8, shape (N,)
        1 stable, −1 unstable, 0 on the boundary: |margin| within 100·n·eps·‖A − BK‖_F, the
        band of :func:`gainboard.core.decide_stability` (one rule for every verdict).
    """
    poles = np.linalg.eigvals(closed_loops)
    margin, verdict = decide_stability_of_stack(poles, closed_loops, sample_time)  # the one rule (core/_stability.py)
    return poles, margin, verdict


def _coefficients_from_roots(roots: np.ndarray) -> np.ndarray:
    """Monic polynomial coefficients, lowest power first, of each row of roots: shape (N, n+1)."""
    count, n = roots.shape
    highest_first = np.zeros((count, n + 1), dtype=complex)
    highest_first[:, 0] = 1.0
    for k in range(n):  # multiply by (s − r_k)
        shifted = np.zeros_like(highest_first)
        shifted[:, 1:] = highest_first[:, :-1]
        highest_first = highest_first - roots[:, k : k + 1] * shifted
    # roots come in conjugate pairs, so the coefficients are real up to rounding
    return np.ascontiguousarray(highest_first.real[:, ::-1])


def _bilinear(coefficients: np.ndarray) -> np.ndarray:
    """(1 − w)^n · p((1 + w)/(1 − w)) for each row p (lowest power first), degree n = columns − 1."""
    count, size = coefficients.shape
    n = size - 1
    result = np.zeros((count, size))
    polynomial = np.polynomial.polynomial
    for k in range(size):  # term p_k (1 + w)^k (1 − w)^(n − k)
        basis = polynomial.polymul(polynomial.polypow([1.0, 1.0], k), polynomial.polypow([1.0, -1.0], n - k))
        result += coefficients[:, k : k + 1] * basis[None, :]
    return result


def _on_axis(coefficients: np.ndarray):
    """Real and imaginary parts of p(jω) as real polynomials in ω (lowest power first)."""
    count, size = coefficients.shape
    powers = np.arange(size)
    rotation = (1j) ** powers  # j^k
    real = coefficients * rotation.real[None, :]
    imaginary = coefficients * rotation.imag[None, :]
    return real, imaginary


def _poly_multiply(p: np.ndarray, q: np.ndarray) -> np.ndarray:
    count = p.shape[0]
    out = np.zeros((count, p.shape[1] + q.shape[1] - 1))
    for k in range(q.shape[1]):
        out[:, k : k + p.shape[1]] += p * q[:, k : k + 1]
    return out


def _nonnegative_real_roots(polynomials: np.ndarray) -> list[np.ndarray]:
    """Real roots ω ≥ 0 of each row (lowest power first), grouped by degree for batched eigvals."""
    count, size = polynomials.shape
    scale = np.abs(polynomials).max(axis=1, keepdims=True)
    scale[scale == 0] = 1.0
    significant = np.abs(polynomials) > _LEADING_TOLERANCE * scale
    degree = np.where(significant.any(axis=1), size - 1 - np.argmax(significant[:, ::-1], axis=1), 0)
    roots: list[np.ndarray] = [np.empty(0)] * count
    for d in np.unique(degree):
        rows = np.flatnonzero(degree == d)
        if d == 0:
            continue
        monic = polynomials[rows, :d] / polynomials[rows, d : d + 1]
        companion = np.zeros((len(rows), d, d))
        companion[:, 1:, :-1] = np.eye(d - 1)
        companion[:, :, -1] = -monic
        values = np.linalg.eigvals(companion)
        real = np.abs(values.imag) <= _REAL_ROOT_TOLERANCE * (1.0 + np.abs(values))
        keep = real & (values.real >= -_REAL_ROOT_TOLERANCE * (1.0 + np.abs(values)))
        for position, row in enumerate(rows):
            roots[row] = np.abs(values[position][keep[position]].real)
    return roots


def single_input_margins(open_loops: np.ndarray, inputs: np.ndarray, gain: np.ndarray,
                         closed_loop_poles: np.ndarray, sample_time: float | None):
    """Gain and phase margins of N single-input loops, the loop broken at the plant input.

    Parameters
    ----------
    open_loops : ndarray, shape (N, n, n)
    inputs : ndarray, shape (N, n, 1)
    gain : ndarray, shape (1, n)
    closed_loop_poles : ndarray, shape (N, n)
        Eigenvalues of A − BK per sample (from :func:`stability_verdicts`).
    sample_time : float or None

    Returns
    -------
    gain_margin_db : ndarray, shape (N,)
        The smaller, in dB, of the increase and the decrease of the loop gain that destabilise
        the loop (``inf`` when none does); as ``gain_margin_db_min`` of ``loop_margins``.
    phase_margin_deg : ndarray, shape (N,)
        Smallest phase change at a gain crossover that destabilises the loop (``inf`` when
        |L| never equals 1).

    Only meaningful for samples whose closed loop is stable (callers mask the others).
    """
    count, n, _ = open_loops.shape
    open_poles = np.linalg.eigvals(open_loops)
    a = _coefficients_from_roots(open_poles)           # lowest power first, monic, degree n
    c = _coefficients_from_roots(closed_loop_poles)
    b = c - a                                           # degree ≤ n − 1 (c and a are monic)
    b[:, n] = 0.0
    if sample_time is not None:
        a, b = _bilinear(a), _bilinear(b)
    a_re, a_im = _on_axis(a)
    b_re, b_im = _on_axis(b)
    # phase crossovers: Im(a conj b) = a_im b_re − a_re b_im = 0
    phase_polynomial = _poly_multiply(a_im, b_re) - _poly_multiply(a_re, b_im)
    # gain crossovers: |b|² − |a|² = 0
    unit_polynomial = (_poly_multiply(b_re, b_re) + _poly_multiply(b_im, b_im)
                       - _poly_multiply(a_re, a_re) - _poly_multiply(a_im, a_im))
    phase_roots = _nonnegative_real_roots(phase_polynomial)
    unit_roots = _nonnegative_real_roots(unit_polynomial)
    gain_margin_db = np.full(count, np.inf)
    phase_margin_deg = np.full(count, np.inf)
    for i in range(count):
        # ω = 0 is always a root of the odd phase polynomial (L(0) is real)
        omegas = np.concatenate([[0.0], phase_roots[i]])
        s = 1j * omegas
        a_values = np.polynomial.polynomial.polyval(s, a[i])
        b_values = np.polynomial.polynomial.polyval(s, b[i])
        with np.errstate(divide="ignore", invalid="ignore"):
            factors = -(a_values / b_values).real
        if sample_time is not None:  # the Nyquist point z = −1, w = ∞: ratio of the leading terms
            lead_a, lead_b = a[i, -1], b[i, -1]
            if lead_b != 0 and lead_a != 0:
                factors = np.append(factors, -lead_a / lead_b)
        factors = factors[np.isfinite(factors) & (factors > 0)]
        above = factors[factors > 1.0]
        below = factors[factors < 1.0]
        increase = above.min() if above.size else np.inf
        decrease = below.max() if below.size else 0.0
        with np.errstate(divide="ignore"):
            increase_db = 20.0 * np.log10(increase)
            decrease_db = 20.0 * np.log10(decrease)
        gain_margin_db[i] = min(increase_db, -decrease_db)
        if unit_roots[i].size:
            s = 1j * unit_roots[i]
            loop = np.polynomial.polynomial.polyval(s, b[i]) / np.polynomial.polynomial.polyval(s, a[i])
            angle = np.degrees(np.angle(loop))
            phase_margin_deg[i] = np.min(np.abs((180.0 + angle + 180.0) % 360.0 - 180.0))
    return gain_margin_db, phase_margin_deg
