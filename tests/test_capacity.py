"""Working days and team capacity, checked against numpy and against cases worked by hand."""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from server.capacity import MemberAvailability, team_capacity, working_days

# --- working days --------------------------------------------------------------------------

weekmasks = (
    st.lists(st.booleans(), min_size=7, max_size=7)
    .filter(any)
    .map(lambda days: "".join("1" if works else "0" for works in days))
)


@st.composite
def periods_with_holidays(draw: st.DrawFn) -> tuple[dt.date, dt.date, list[dt.date], str]:
    start = draw(st.dates(min_value=dt.date(1990, 1, 1), max_value=dt.date(2060, 12, 31)))
    end = start + dt.timedelta(days=draw(st.integers(min_value=0, max_value=800)))
    # Holidays around the period too: dates outside it must not count.
    near = st.dates(min_value=start - dt.timedelta(days=30), max_value=end + dt.timedelta(days=30))
    holidays = draw(st.lists(near, max_size=25))
    return start, end, holidays, draw(weekmasks)


@settings(max_examples=400, deadline=None, database=None)
@given(periods_with_holidays())
def test_working_days_match_numpy_busday_count(
    case: tuple[dt.date, dt.date, list[dt.date], str],
) -> None:
    start, end, holidays, weekmask = case
    # Reference: numpy.busday_count, a general-purpose business-day counter. Its end date is
    # exclusive, so one day is added to our inclusive end. It ignores duplicate holidays and
    # holidays that fall on non-working weekdays, as working_days must.
    expected = np.busday_count(
        start,
        end + dt.timedelta(days=1),
        weekmask=weekmask,
        holidays=np.array(holidays, dtype="datetime64[D]"),
    )
    assert working_days(start, end, holidays, weekmask) == int(expected)


def test_working_days_hand_counted() -> None:
    # Counted on a calendar (from memory: 1 March 2027 and 4 January 2027 are Mondays).
    assert working_days(dt.date(2027, 3, 1), dt.date(2027, 3, 12)) == 10  # two full weeks
    assert working_days(dt.date(2027, 3, 6), dt.date(2027, 3, 7)) == 0  # a weekend
    assert working_days(dt.date(2027, 3, 1), dt.date(2027, 3, 1)) == 1  # one Monday
    # 13 weeks of 5 days, minus two Monday holidays.
    q1 = working_days(
        dt.date(2027, 1, 4), dt.date(2027, 4, 2), [dt.date(2027, 2, 15), dt.date(2027, 3, 29)]
    )
    assert q1 == 63
    # A holiday on a Saturday takes nothing away; the same holiday twice counts once.
    saturday, wednesday = dt.date(2027, 3, 6), dt.date(2027, 3, 3)
    assert working_days(dt.date(2027, 3, 1), dt.date(2027, 3, 12), [saturday]) == 10
    assert working_days(dt.date(2027, 3, 1), dt.date(2027, 3, 12), [wednesday, wednesday]) == 9
    # A four-day week (Monday to Thursday) over the same two weeks.
    assert working_days(dt.date(2027, 3, 1), dt.date(2027, 3, 12), weekmask="1111000") == 8
    # A Sunday-to-Thursday week: 2 March (Tuesday) to 8 March (Monday) has 5 working days.
    assert working_days(dt.date(2027, 3, 2), dt.date(2027, 3, 8), weekmask="1111001") == 5


def test_working_days_of_a_reversed_range_is_zero() -> None:
    assert working_days(dt.date(2027, 3, 12), dt.date(2027, 3, 1)) == 0


@pytest.mark.parametrize("weekmask", ["111110", "11111000", "1111a00", "", "Mo-Fr  "])
def test_working_days_refuses_a_malformed_weekmask(weekmask: str) -> None:
    with pytest.raises(ValueError, match="weekmask"):
        working_days(dt.date(2027, 3, 1), dt.date(2027, 3, 12), weekmask=weekmask)


# --- team capacity -------------------------------------------------------------------------


def test_capacity_two_members_worked_by_hand() -> None:
    # 10 working days. Ola: full time, 2 days off -> 8 days x 1.0 = 8.
    # Kari: half time, no days off -> 10 days x 0.5 = 5.
    # Gross 13; x focus 0.7 = 9.1; reserve 15 % of 9.1 = 1.365; capacity 9.1 - 1.365 = 7.735.
    result = team_capacity(
        10,
        [MemberAvailability("Ola", 2, 1.0), MemberAvailability("Kari", 0, 0.5)],
        focus_factor=0.7,
        reserve_pct=15,
    )
    assert [m.available_days for m in result.members] == [8, 10]
    assert [m.contributed_days for m in result.members] == pytest.approx([8, 5])
    assert result.gross_days == pytest.approx(13)
    assert result.focused_days == pytest.approx(9.1)
    assert result.reserve_days == pytest.approx(1.365)
    assert result.capacity_days == pytest.approx(7.735)


def test_capacity_defaults_are_focus_07_and_reserve_15() -> None:
    # Same case without naming the settings: the defaults give the same 7.735.
    result = team_capacity(
        10, [MemberAvailability("Ola", 2, 1.0), MemberAvailability("Kari", 0, 0.5)]
    )
    assert (result.focus_factor, result.reserve_pct) == (0.7, 15.0)
    assert result.capacity_days == pytest.approx(7.735)


def test_capacity_three_full_timers_worked_by_hand() -> None:
    # 20 working days, three people full time, nobody away: 60 person-days.
    # x focus 0.6 = 36; reserve 20 % = 7.2; capacity 28.8.
    people = [MemberAvailability(name, 0, 1.0) for name in ("A", "B", "C")]
    result = team_capacity(20, people, focus_factor=0.6, reserve_pct=20)
    assert result.gross_days == pytest.approx(60)
    assert result.reserve_days == pytest.approx(7.2)
    assert result.capacity_days == pytest.approx(28.8)


def test_capacity_quarter_share_and_half_days_worked_by_hand() -> None:
    # 10 working days. Quarter-time member, 3 days off: 7 x 0.25 = 1.75.
    # Member at 0.8 with 2.5 days off: 7.5 x 0.8 = 6. Gross 7.75.
    # x focus 0.8 = 6.2; reserve 10 % = 0.62; capacity 5.58.
    result = team_capacity(
        10,
        [MemberAvailability("Q", 3, 0.25), MemberAvailability("R", 2.5, 0.8)],
        focus_factor=0.8,
        reserve_pct=10,
    )
    assert result.gross_days == pytest.approx(7.75)
    assert result.focused_days == pytest.approx(6.2)
    assert result.capacity_days == pytest.approx(5.58)


def test_days_off_beyond_the_period_give_zero_not_negative() -> None:
    # 12 days off in a 10-day period leaves nothing, not minus two days.
    # The other member: 10 x 1.0. Focus 1, reserve 0: capacity is exactly the 10 days.
    result = team_capacity(
        10,
        [MemberAvailability("Away", 12, 1.0), MemberAvailability("Here", 0, 1.0)],
        focus_factor=1.0,
        reserve_pct=0,
    )
    assert result.members[0].available_days == 0
    assert result.capacity_days == pytest.approx(10)


def test_capacity_of_a_team_without_members_is_zero() -> None:
    result = team_capacity(10, [])
    assert result.members == ()
    assert result.capacity_days == 0


@pytest.mark.parametrize("focus_factor", [0, -1, 1.5, 1.0000001, math.nan, math.inf])
def test_focus_factor_outside_zero_to_one_is_refused(focus_factor: float) -> None:
    with pytest.raises(ValueError, match="focus factor"):
        team_capacity(10, [MemberAvailability("Ola", 0, 1.0)], focus_factor=focus_factor)


@pytest.mark.parametrize("reserve_pct", [100, 150, -5, -0.001, math.nan, math.inf])
def test_reserve_outside_zero_to_hundred_is_refused(reserve_pct: float) -> None:
    with pytest.raises(ValueError, match="reserve"):
        team_capacity(10, [MemberAvailability("Ola", 0, 1.0)], reserve_pct=reserve_pct)


def test_bounds_themselves_are_accepted() -> None:
    # Focus factor 1 and reserve 0 are allowed (the intervals are (0, 1] and [0, 100)).
    result = team_capacity(10, [MemberAvailability("Ola", 0, 1.0)], 1.0, 0.0)
    assert result.capacity_days == pytest.approx(10)
    nearly_all_reserved = team_capacity(10, [MemberAvailability("Ola", 0, 1.0)], 1.0, 99.0)
    assert nearly_all_reserved.capacity_days == pytest.approx(0.1)
