"""Day/night contrasts and cosinor on a scan (the xarray layer over tfhrv.circadian.core)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
import xarray as xr

from tfhrv.circadian.days import (
    CircadianOptions,
    circadian_dataset,
    circadian_table,
    format_circadian,
    read_sleep_log,
)
from tfhrv.dataset.build import scan
from tfhrv.signal.clean import clean
from tfhrv.synth import simulate_recording

START = dt.datetime(2026, 3, 2, 8, 0)


@pytest.fixture(scope="module")
def day_worker():
    """24 h of the synthetic day worker (sleeps 23:00-07:00; ground truth in sim.truth)."""
    sim = simulate_recording(days=1.0, start=START, profile="day-worker", rng=7)
    return sim, scan(clean(sim.recording))


def _row(table, variable, tier="short", day="all"):
    r = table[(table.variable == variable) & (table.tier == tier) & (table.day == day)]
    assert len(r) == 1
    return r.iloc[0]


def test_clock_windows_give_the_known_directions(day_worker):
    _, tree = day_worker
    table = circadian_table(tree, options=CircadianOptions(n_boot=199))
    a1 = _row(table, "alpha1")
    nn = _row(table, "nn_mean_ms")
    assert a1.period_source == "clock"
    # Ivanov et al. 1999: lower short-term exponent asleep; the generator's truth says
    # alpha1 about 0.90 asleep vs 1.12 awake.
    assert a1.night_mean < a1.day_mean and a1.difference_high < 0
    # longer NN intervals at night (the generator: 1000 vs 800 ms)
    assert nn.difference_low > 100
    assert nn.n_night > 50 and nn.n_day > 80
    # cosinor of mean NN peaks within the sleep period 23:00-07:00 (acrophase mod 24 h)
    peak = nn.acrophase_h
    assert (peak >= 23) or (peak <= 7), peak
    assert nn.cosinor_p < 1e-6
    text = format_circadian(table)
    assert "alpha1 (short)" in text and "clock" in text


def test_unknown_clock_uses_the_inferred_rest_period(day_worker):
    sim, _ = day_worker
    tree = scan(clean(sim.recording.with_start(None)))
    table = circadian_table(tree, options=CircadianOptions(n_boot=199))
    nn = _row(table, "nn_mean_ms")
    assert nn.period_source == "inferred rest period"
    assert nn.acrophase_reference == "hours from start"
    assert nn.difference > 100  # the inferred block holds the longest intervals
    with pytest.raises(ValueError, match="--start"):
        circadian_table(tree, options=CircadianOptions(period="clock"))


def test_sleep_log_takes_precedence(day_worker, tmp_path):
    _, tree = day_worker
    log = tmp_path / "sleep.csv"
    log.write_text("record,rest_start,rest_end\nother,2026-03-02T10:00,2026-03-02T12:00\n"
                   f"{tree.attrs['record_id']},2026-03-02T23:00,2026-03-03T07:00\n")
    periods = read_sleep_log(log, tree.attrs["record_id"])
    assert periods == [(dt.datetime(2026, 3, 2, 23), dt.datetime(2026, 3, 3, 7))]
    table = circadian_table(tree, options=CircadianOptions(n_boot=199), sleep_log=periods)
    nn = _row(table, "nn_mean_ms")
    assert nn.period_source == "sleep log"
    assert np.isfinite(nn.difference) and nn.difference > 100


def test_sleep_log_errors_name_file_and_line(tmp_path):
    from tfhrv.core.errors import RecordFormatError

    bad = tmp_path / "log.csv"
    bad.write_text("record,rest_start,rest_end\nr1,yesterday,today\n")
    with pytest.raises(RecordFormatError, match="line 2"):
        read_sleep_log(bad, "r1")
    with pytest.raises(RecordFormatError, match="no rest period"):
        read_sleep_log(bad, "r2")


def test_circadian_group_keeps_the_periods_figures_shade(day_worker):
    # a sleep log 01:00-05:00 differs from the default clock night 00:00-06:00: the
    # /circadian group keeps the mask the contrasts used and the figures shade that one
    from tfhrv.viz.figkit import _rest

    _, tree = day_worker
    periods = [(dt.datetime(2026, 3, 3, 1), dt.datetime(2026, 3, 3, 5))]
    opt = CircadianOptions(n_boot=199)
    table = circadian_table(tree, options=opt, sleep_log=periods)
    t = tree.copy()
    t["/circadian"] = xr.DataTree(circadian_dataset(table, opt, tree=t, sleep_log=periods))
    clock = t["/short"]["clock_hour"].values
    night = t["/circadian"]["short_night"].values.astype(bool)
    assert night.any() and np.all((clock[night] >= 1.0) & (clock[night] < 5.0 + 1 / 12))
    shaded, _, _, label = _rest(t)
    np.testing.assert_array_equal(shaded, night)
    assert label == "rest period (sleep log)"
    # without the group the figures fall back to the default clock night
    assert _rest(tree)[3].startswith("night 00:00")


def test_circadian_group_follows_the_schema_and_is_checked(day_worker):
    # every column of the /circadian group is declared (long_name, units where one unit
    # applies); validate() checks the declared variables of the group when a file has it
    # and names what is wrong (other variables are allowed: files of earlier releases)
    from tfhrv.dataset.schema import OPTIONAL_GROUPS, problems

    _, tree = day_worker
    opt = CircadianOptions(n_boot=199)
    t = tree.copy()
    t["/circadian"] = xr.DataTree(circadian_dataset(circadian_table(t, options=opt), opt,
                                                    tree=t))
    assert problems(t) == []
    ds = t["/circadian"].to_dataset()
    assert set(ds.variables) == set(OPTIONAL_GROUPS["/circadian"])
    assert ds["acrophase_h"].attrs["units"] == "h"
    assert "units" not in ds["day_mean"].attrs  # per row: the units of the row's variable
    bad = ds.assign(extra=("row", ds["day_mean"].values),
                    acrophase_h=ds["acrophase_h"].assign_attrs(units="deg"))
    t["/circadian"] = xr.DataTree(bad)
    assert problems(t) == ["/circadian/acrophase_h has units 'deg', expected 'h'"]


def test_overlapping_windows_are_resampled_in_blocks_of_one_window_length(day_worker,
                                                                        monkeypatch):
    # Moving-block bootstrap (Kunsch 1989): blocks must span the dependence of the series.
    # 4-h windows at a 1-h hop share beats with their three neighbours, so the long tier's
    # blocks must hold at least four windows (1-h blocks gave one window and far too narrow
    # intervals); the short tier's 5-min windows do not overlap and keep 1-h blocks.
    import tfhrv.circadian.days as days

    seen = {}
    real = days.night_day_contrast

    def spy(t, *args, **kwargs):
        spacing = float(np.median(np.diff(np.sort(t)))) if len(t) > 1 else np.nan
        seen.setdefault(round(spacing, 3), set()).add(kwargs["block_hours"])
        return real(t, *args, **kwargs)

    monkeypatch.setattr(days, "night_day_contrast", spy)
    _, tree = day_worker
    circadian_table(tree, options=CircadianOptions(n_boot=19))
    assert seen[1.0] == {4.0}  # long tier: 1-h spacing, 4-h windows
    assert seen[round(5 / 60, 3)] == {1.0}  # short tier: 5-min windows, 1-h blocks


def test_few_overlapping_windows_give_no_interval_only_a_descriptive_difference(day_worker):
    # n windows of length W at hop h hold about n h / W independent ones; one 24-h record has
    # a night of six 4-h windows at a 1-h hop (about 1.5 independent), from which a moving-
    # block bootstrap (Kunsch 1989) of one or two blocks cannot show the spread, and Hedges'
    # g of nearly identical overlapping values is meaningless. The 5-min tier keeps both.
    _, tree = day_worker
    table = circadian_table(tree, options=CircadianOptions(n_boot=99))
    long = _row(table, "alpha_long", tier="long")
    assert np.isfinite(long.difference)
    assert np.isnan(long.difference_low) and np.isnan(long.effect_size)
    assert "independent" in long.contrast_note
    short = _row(table, "alpha1")
    assert np.isfinite(short.difference_low) and np.isfinite(short.effect_size)
    assert "note: alpha_long (long)" in format_circadian(table)
