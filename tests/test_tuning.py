"""Receiver set-up over several observations: one centre for as long as it serves them all."""
import pytest

from planner.site import Receiver
from planner.spectral import tuning_advice
from planner.tuning import LineSetup, shared_setups

# The Hollowmere receiver: 2.4 MHz sampled, 80 % usable (1.92 MHz), so +-0.96 MHz about the centre.
RX = Receiver(bandwidth_mhz=2.4, channels=1024, tsys_k=110.0)
# Float64 at ~1420 MHz resolves 2e-13 MHz; 1 mHz leaves room for a few roundings.
FLOAT_MHZ = 1e-9


def _setup(v_lo, v_hi, corr_lo, corr_hi) -> LineSetup:
    return LineSetup(v_lo, v_hi, corr_lo, corr_hi, tuning_advice(v_lo, v_hi, corr_lo, corr_hi, RX))


def test_runs_keep_one_centre_until_a_day_would_be_worse_off():
    # Hand-worked in tests/test_spectral.py::test_shared_centre_hand_worked: a alone 1420.019,
    # a with b 1420.029 MHz, a with c impossible (c's line sits 0.33 MHz higher).
    a, b, c = _setup(-100, 50, -10, 10), _setup(-100, 50, -10, 14), _setup(-100, 50, 60, 80)
    out = shared_setups([a, b, None, c, a])
    centres = [None if s is None else s.advice.centre_mhz for s in out]
    assert centres[0] == pytest.approx(1420.029, abs=FLOAT_MHZ)
    assert centres[1] == centres[0]          # b joins a's run
    assert centres[2] is None                # nothing observed: no setting, the run goes on
    assert centres[3] == pytest.approx(c.advice.centre_mhz, abs=FLOAT_MHZ)  # c starts a run
    assert centres[4] == pytest.approx(a.advice.centre_mhz, abs=FLOAT_MHZ)  # a cannot join c
    # Nothing is served worse than by its own advice, and the velocities stay the day's own.
    for own, shared in zip([a, b, None, c, a], out):
        if own is None:
            continue
        assert shared.advice.fits >= own.advice.fits
        assert shared.advice.spike_clear >= own.advice.spike_clear
        assert (shared.v_lsr_min_kms, shared.lsr_corr_max_kms) == (own.v_lsr_min_kms,
                                                                   own.lsr_corr_max_kms)


def test_slow_drift_needs_no_retune():
    # The LSR correction drifting 0.3 km/s a day (0.3 * 4.738 = 1.42 kHz) over 30 days: the line
    # moves by 29 * 1.42 = 41 kHz, less than the 0.96 - (0.805 + 0.05) = 0.105 MHz of room in the
    # upper half-band above a line of span 0.805 MHz plus the 0.05 MHz guard, so one centre
    # serves the whole month while the day-by-day advice changes by a kHz now and then.
    days = [_setup(-100, 50, -10 + 0.3 * d, 10 + 0.3 * d) for d in range(30)]
    own = {round(s.advice.centre_mhz, 6) for s in days}
    shared = {round(s.advice.centre_mhz, 6) for s in shared_setups(days)}
    assert len(own) > 10 and len(shared) == 1
    assert all(s.advice.fits and s.advice.spike_clear for s in shared_setups(days))
