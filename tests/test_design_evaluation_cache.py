"""The selected entry's intervals and locus are reused during a slider drag, with unchanged results.

While only the selected entry k_ij changes, ``evaluate_design`` keeps that entry's
analysis (built from A − B·K with k_ij zeroed). These tests prove that a cached
result equals the uncached computation exactly, that the values themselves agree
with outside references (Routh–Hurwitz / Jury intervals, brute-force eigenvalues
from numpy), and that changing any other entry of K starts a new analysis.
"""

from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment

from gainboard.core import EvaluationOptions, GainError, Plant, evaluate_design
from gainboard.core import _single_entry as single_entry

# Reference case 1 (/work/shared/reference-cases.md): Ogata, Modern Control Engineering, 5th ed.,
# Example 10-1 (from memory); K = [199, 55, 8] places −2±4j, −10.
CUBIC = Plant(A=[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [-1.0, -5.0, -6.0]], B=[[0.0], [0.0], [1.0]])
CUBIC_K = np.array([[199.0, 55.0, 8.0]])

# Reference case 14: ZOH double integrator with T = 1, Åström & Wittenmark, Computer-Controlled
# Systems, 3rd ed. (from memory): with k2 = 1 the loop is stable for k1 in (0, 2) (Jury test).
SAMPLED = Plant(A=[[1.0, 1.0], [0.0, 1.0]], B=[[0.5], [1.0]], sample_time=1.0)
SAMPLED_K = np.array([[0.7, 1.0]])

DRAG = EvaluationOptions(selected_entry=(0, 0), include_margins=False)


def _slider_sequence(gain: np.ndarray, entry, values):
    for value in values:
        moved = gain.copy()
        moved[entry] = value
        yield moved


def _assert_identical(cached, fresh):
    """Bit-for-bit equality of two (StableIntervals, EntryLocus) pairs (repr keeps every float digit)."""
    cached_intervals, cached_locus = cached
    fresh_intervals, fresh_locus = fresh
    assert repr(cached_intervals) == repr(fresh_intervals)
    assert np.array_equal(cached_locus.gains, fresh_locus.gains)
    assert np.array_equal(cached_locus.poles, fresh_locus.poles)
    assert repr(cached_locus.crossings) == repr(fresh_locus.crossings)
    assert cached_locus.current_value == fresh_locus.current_value
    assert cached_locus.evaluation_count == fresh_locus.evaluation_count
    assert cached_locus.span == fresh_locus.span
    assert cached_locus.entry == fresh_locus.entry and cached_locus.sampled == fresh_locus.sampled


def _assert_locus_matches_eigvals(plant: Plant, gain: np.ndarray, entry, locus):
    """Every locus sample against numpy.linalg.eigvals of A − B·K(v) (brute-force reference)."""
    moved = gain.copy()
    for value, poles in zip(locus.gains, locus.poles):
        moved[entry] = value
        reference = np.linalg.eigvals(plant.A - plant.B @ moved)
        cost = np.abs(poles[:, None] - reference[None, :])
        rows, cols = linear_sum_assignment(cost)
        scale = max(1.0, float(np.max(np.abs(reference))))
        # repeated poles at a breakaway point are only known to about sqrt(eps) (common practice, no source)
        assert cost[rows, cols].max() <= 1e-6 * scale


@pytest.fixture(autouse=True)
def _fresh_cache():
    single_entry._clear_entry_records()
    yield
    single_entry._clear_entry_records()


def test_cached_drag_equals_uncached_and_routh_hurwitz_interval_continuous():
    values = [199.0, 199.4, 200.1, 201.0, 203.5, 198.2, 199.0]
    for moved in _slider_sequence(CUBIC_K, (0, 0), values):
        evaluation = evaluate_design(CUBIC, moved, DRAG)
        cached = (evaluation.selected_intervals, evaluation.selected_locus)
        _assert_identical(cached, single_entry._entry_views(CUBIC, moved, 0, 0, None, use_cache=False))
        # reference case 5 (Routh–Hurwitz, reference-cases.md): k1 in (−1, 839) with k2 = 55, k3 = 8
        (low, high), = evaluation.selected_intervals.intervals
        assert low == pytest.approx(-1.0, abs=1e-9) and high == pytest.approx(839.0, rel=1e-9)
        assert evaluation.selected_intervals.current_value == moved[0, 0]
        assert evaluation.selected_intervals.current_is_stable == (-1.0 < moved[0, 0] < 839.0)  # same source
        # the current value is one of the samples, with the poles of the design itself
        assert moved[0, 0] in evaluation.selected_locus.gains
        _assert_locus_matches_eigvals(CUBIC, moved, (0, 0), evaluation.selected_locus)
        # the sliders and the locus read one analysis of the selected entry
        assert evaluation.entry_intervals[(0, 0)] is evaluation.selected_intervals
    # the whole drag stayed on one analysis and one coarse range: the cache was used
    records = single_entry._ENTRY_RECORDS[CUBIC]
    assert len(records) == 1
    (record,) = records.values()
    assert len(record.loci) == 1


def test_cached_drag_equals_uncached_and_jury_interval_sampled():
    values = [0.7, 0.72, 0.75, 0.69, 0.8, 1.5, 2.4, -0.3]
    for moved in _slider_sequence(SAMPLED_K, (0, 0), values):
        evaluation = evaluate_design(SAMPLED, moved, DRAG)
        cached = (evaluation.selected_intervals, evaluation.selected_locus)
        _assert_identical(cached, single_entry._entry_views(SAMPLED, moved, 0, 0, None, use_cache=False))
        # reference case 14 (Jury, Åström & Wittenmark, from memory): k1 in (0, 2) when k2 = 1
        (low, high), = evaluation.selected_intervals.intervals
        assert low == pytest.approx(0.0, abs=1e-9) and high == pytest.approx(2.0, rel=1e-9)
        assert evaluation.selected_intervals.current_is_stable == (0.0 < moved[0, 0] < 2.0)  # same source
        assert evaluation.selected_locus.sampled
        _assert_locus_matches_eigvals(SAMPLED, moved, (0, 0), evaluation.selected_locus)


def test_fixed_range_drag_reuses_one_locus_and_matches_eigvals():
    options = EvaluationOptions(selected_entry=(0, 2), entry_range=(-5.0, 40.0), include_margins=False,
                                include_all_entry_intervals=False)
    for moved in _slider_sequence(CUBIC_K, (0, 2), [8.0, 8.5, 9.25, 12.0, 45.0]):
        evaluation = evaluate_design(CUBIC, moved, options)
        cached = (evaluation.selected_intervals, evaluation.selected_locus)
        _assert_identical(cached, single_entry._entry_views(CUBIC, moved, 0, 2, (-5.0, 40.0), use_cache=False))
        # reference case 5 (Routh–Hurwitz): k3 in (−8/3, ∞) with k1 = 199, k2 = 55
        (low, high), = evaluation.selected_intervals.intervals
        assert low == pytest.approx(-8.0 / 3.0, rel=1e-9) and high == np.inf
        locus = evaluation.selected_locus
        assert locus.gains[0] == -5.0 and locus.gains[-1] == 40.0
        # inside the range the current value is sampled; 45 lies outside and is not
        assert (moved[0, 2] in locus.gains) == (moved[0, 2] <= 40.0)
        _assert_locus_matches_eigvals(CUBIC, moved, (0, 2), locus)
    (record,) = single_entry._ENTRY_RECORDS[CUBIC].values()
    assert list(record.loci) == [(-5.0, 40.0)]


def test_changing_another_entry_starts_a_new_analysis():
    first = evaluate_design(CUBIC, CUBIC_K, DRAG)
    other = CUBIC_K.copy()
    other[0, 1] = 60.0
    second = evaluate_design(CUBIC, other, DRAG)
    # Routh–Hurwitz (reference case 4 formula, Ogata sec. 5-6): s³+(6+k3)s²+(5+k2)s+(1+k1) is stable
    # iff 1+k1 > 0 and (6+k3)(5+k2) > 1+k1, so the upper end moves from 839 to 14·65 − 1 = 909
    assert first.selected_intervals.intervals[0][1] == pytest.approx(839.0, rel=1e-9)
    assert second.selected_intervals.intervals[0][1] == pytest.approx(909.0, rel=1e-9)
    _assert_identical((second.selected_intervals, second.selected_locus),
                      single_entry._entry_views(CUBIC, other, 0, 0, None, use_cache=False))
    assert len(single_entry._ENTRY_RECORDS[CUBIC]) == 2


def test_cache_keeps_a_few_analyses_per_plant():
    # what is checked is the size bound and that an evicted analysis comes back identical (no outside value)
    for k2 in [50.0, 51.0, 52.0, 53.0, 54.0, 55.0]:
        moved = CUBIC_K.copy()
        moved[0, 1] = k2
        evaluate_design(CUBIC, moved, DRAG)
    assert len(single_entry._ENTRY_RECORDS[CUBIC]) == single_entry._FAMILIES_PER_PLANT
    moved = CUBIC_K.copy()
    moved[0, 1] = 50.0  # evicted first: recomputed, and equal to an uncached computation
    evaluation = evaluate_design(CUBIC, moved, DRAG)
    _assert_identical((evaluation.selected_intervals, evaluation.selected_locus),
                      single_entry._entry_views(CUBIC, moved, 0, 0, None, use_cache=False))


def test_random_plant_drag_equals_uncached_and_eigvals(rng):
    n, m = 6, 2
    A = rng.standard_normal((n, n))
    B = rng.standard_normal((n, m))
    plant = Plant(A=A, B=B)
    gain = rng.standard_normal((m, n))
    entry = (1, 3)
    options = EvaluationOptions(selected_entry=entry, include_margins=False)
    start = gain[entry]
    for moved in _slider_sequence(gain, entry, start + 0.01 * np.arange(6)):
        evaluation = evaluate_design(plant, moved, options)
        _assert_identical((evaluation.selected_intervals, evaluation.selected_locus),
                          single_entry._entry_views(plant, moved, *entry, None, use_cache=False))
        _assert_locus_matches_eigvals(plant, moved, entry, evaluation.selected_locus)
        # brute-force reference for the intervals: numpy eigvals at the midpoint of every finite piece
        probe = moved.copy()
        for low, high, count in evaluation.selected_intervals.pieces:
            if np.isfinite(low) and np.isfinite(high):
                probe[entry] = 0.5 * (low + high)
                real_parts = np.linalg.eigvals(plant.A - plant.B @ probe).real
                assert (count == 0) == bool(np.all(real_parts < 0.0))


def test_threads_sharing_the_cache_get_uncached_results():
    moves = list(_slider_sequence(CUBIC_K, (0, 0), np.linspace(190.0, 210.0, 12)))
    with ThreadPoolExecutor(max_workers=4) as pool:
        results = list(pool.map(lambda moved: evaluate_design(CUBIC, moved, DRAG), moves))
    for moved, evaluation in zip(moves, results):
        _assert_identical((evaluation.selected_intervals, evaluation.selected_locus),
                          single_entry._entry_views(CUBIC, moved, 0, 0, None, use_cache=False))


def test_bad_range_is_refused_before_anything_is_kept():
    options = EvaluationOptions(selected_entry=(0, 0), entry_range=(3.0, 1.0), include_margins=False)
    with pytest.raises(GainError, match="range is empty"):
        evaluate_design(CUBIC, CUBIC_K, options)
    assert CUBIC not in single_entry._ENTRY_RECORDS


@pytest.mark.parametrize("plant, gain", [(CUBIC, CUBIC_K), (SAMPLED, SAMPLED_K)])
def test_locus_span_after_adding_the_current_sample_is_the_whole_bounding_box(plant, gain):
    start = gain[0, 0]
    for moved in _slider_sequence(gain, (0, 0), start * (1.0 + 0.003 * np.arange(-3, 4))):
        locus = evaluate_design(plant, moved, DRAG).selected_locus
        assert moved[0, 0] in locus.gains  # the current sample was added to the kept locus
        # reference: the diagonal of the bounding box of every sampled pole, by numpy (ptp, hypot)
        poles = np.asarray(locus.poles)
        assert locus.span == float(np.hypot(np.ptp(poles.real), np.ptp(poles.imag)))
