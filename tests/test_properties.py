"""Property-based tests over every registered function (hypothesis).

Each function gets random and hostile arguments built from its registered
argument kinds: plausible numbers, extreme and non-finite numbers, text,
blanks, logical values, ranges of odd shapes with blanks and text. Whatever
comes in, only the project's error type may come out, and every result lies
in the range its result kind declares (a reliability never above 1, a band
number a positive integer, a proportion within 0..1, ...).
"""

import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from trueband.funcs import REGISTRY
from trueband.funcs.errors import TruebandError
from trueband.funcs.registry import RESULT_KINDS, call_column

pytestmark = pytest.mark.slow  # every test here takes seconds: the quick loop leaves the file out

plausible = st.one_of(
    st.floats(0, 1),
    st.floats(-3, 3),
    st.integers(0, 100).map(float),
    st.sampled_from([0.0, 0.5, 0.8, 0.95, 1.0, 2.0, 10.0, 100.0]),
)
hostile = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([1e308, -1e308, 5e-324, -0.0, 1e-300, 1e16]),
    st.integers(-10**20, 10**20),
    st.just(10**400),  # a whole number beyond the float range
    st.text(max_size=5),
    st.none(),
    st.booleans(),
    st.lists(st.floats(0, 5), max_size=3),
)
cell = st.one_of(
    st.integers(0, 4).map(float),   # repeated small values: items, ratings, categories
    st.integers(0, 1).map(float),
    st.floats(0, 1),
    st.floats(-100, 100),
    st.none(),
    st.sampled_from(["a", "b", "", " ", "x1"]),
    st.booleans(),
    st.floats(allow_nan=True, allow_infinity=True),
    st.just(10**400),
)
clean_cell = st.one_of(st.integers(0, 4).map(float), st.integers(0, 1).map(float), st.floats(0, 1), st.none())


@st.composite
def ranges(draw):
    rows = draw(st.integers(0, 9))
    cols = draw(st.integers(1, 6))
    cells = draw(st.sampled_from([clean_cell, clean_cell, cell]))
    grid = [[draw(cells) for _ in range(cols)] for _ in range(rows)]
    return draw(st.sampled_from([grid, [r[0] for r in grid] if grid else []]))


def argument_strategy(arg):
    if arg.kind == "range":
        return st.one_of(ranges(), ranges(), hostile)
    if arg.choices:
        return st.one_of(st.sampled_from(arg.choices), st.sampled_from([c.upper() for c in arg.choices]), hostile)
    if arg.kind == "boolean":
        return st.one_of(st.booleans(), hostile)
    if arg.kind == "integer":
        return st.one_of(st.integers(-2, 12), st.integers(1, 5), hostile)
    return st.one_of(plausible, plausible, plausible, hostile)


def check_value(spec, value):
    kind, low, high = RESULT_KINDS[spec.returns]
    assert isinstance(value, kind) and (kind is not int or not isinstance(value, bool)), (spec.name, value)
    if kind is str:
        assert value, (spec.name, value)
    elif kind is not bool:
        assert math.isfinite(value), (spec.name, value)
        assert low is None or value >= low, (spec.name, value)
        assert high is None or value <= high, (spec.name, value)


@pytest.mark.parametrize("name", sorted(REGISTRY))
def test_only_project_errors_escape_and_results_stay_in_range(name):
    spec = REGISTRY[name]

    @settings(max_examples=150, deadline=None, suppress_health_check=list(HealthCheck), database=None)
    @given(st.tuples(*[argument_strategy(a) for a in spec.arguments]),
           st.integers(spec.min_args, spec.max_args))
    def run(args, count):
        try:
            value = spec(*args[:count])
        except TruebandError as exc:
            assert exc.code.startswith("#") and exc.message
            return
        check_value(spec, value)

    run()


@pytest.mark.parametrize("name", sorted(n for n, s in REGISTRY.items() if s.elementwise))
def test_column_path_equals_single_calls(name):
    spec = REGISTRY[name]
    numbers = [a for a in spec.arguments if a.name in spec.elementwise]

    @settings(max_examples=40, deadline=None, suppress_health_check=list(HealthCheck), database=None)
    @given(st.data())
    def run(data):
        varying = numbers[data.draw(st.integers(0, len(numbers) - 1))]
        length = data.draw(st.integers(1, 12))
        values = st.integers(0, 60) if varying.kind == "integer" else plausible
        column = data.draw(st.lists(st.one_of(values, values, hostile), min_size=length, max_size=length))
        same = {a.name: data.draw(argument_strategy(a)) for a in spec.arguments
                if a.name != varying.name and (a.required or data.draw(st.booleans()))}
        got = call_column(name, {varying.name: column}, same)
        for i, x in enumerate(column):
            try:
                want = spec(**same, **{varying.name: x})
            except TruebandError as exc:
                want = exc
            if isinstance(want, TruebandError):
                assert isinstance(got[i], TruebandError) and got[i].code == want.code, (i, x, got[i], want)
            else:
                assert not isinstance(got[i], TruebandError), (i, x, got[i])
                assert got[i] == pytest.approx(want, rel=1e-12, abs=1e-12), (i, x)

    run()


def test_column_path_keeps_whole_numbers_beyond_64_bits():
    # Regression: results of integer kind went through int64 and wrapped around above 2**63.
    same = {"focal_selected": 1, "focal_applicants": 1e19, "ref_selected": 1, "target": 1}
    column = call_column("IMPACT_EXTRA_SELECTIONS", {"ref_applicants": [2, 5]}, same)
    assert column == [REGISTRY["IMPACT_EXTRA_SELECTIONS"](**same, ref_applicants=n) for n in (2, 5)]
