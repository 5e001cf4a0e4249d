"""The survey dispatcher: which block next, and keeping the Sun off the feed between blocks.

Scheduler: a deterministic greedy dispatcher with look-ahead. Whenever the dish
is free at time t it considers every unfinished target whose earliest possible
full-integration start lies within ``LOOKAHEAD_MIN`` of t. For each it works
out the real start: slew (shortest wrap-legal move, ``planner.slew``) to where
the target will be when the block starts, waiting if the target is not yet
startable, iterated until the dish arrives in time; with reference positions
the unit is target + slew + reference, and the reference must be startable
within ``REFERENCE_MAX_WAIT_MIN`` of the dish reaching it. Each feasible unit is
scored

    score = priority * efficiency * (1 + urgency)

``efficiency`` = integration minutes / minutes from t to the end of the unit
(slews, waits and the reference count against it, so short slews win);
``urgency`` = min(1, unit length * repeats still wanted / time left in the
period in which the target can still start a full block), so a target about
to be lost for good (it sets soonest, or this is its last night) can double its
score, while one with plenty of chances left barely changes. The best score
wins; ties go to the earlier target in the input (deterministic). Look-ahead
gap filling: if the winner must wait for its start, the best other unit that
ends early enough for the dish to reach the winner in time is done first.
When nothing is startable within the look-ahead, time jumps to the next start
possibility. The dispatcher therefore never places a block that breaks a
constraint, never overlaps blocks, and fits every slew in the gap before its
block; it does not guarantee an optimum.

Feed safety (the Sun never within ``sun_hazard_deg`` of the dish axis, moving,
parked or idle; ``planner.sunsafety``):

* Slews: a wrap choice whose path (both axes at once at their rates, the way
  the drive azimuth goes) passes within hazard + ``slew_sun_margin_deg`` of the
  Sun is illegal (``slew.choose_drive_az``); with no legal choice the unit is
  not startable then. The Sun is taken at one grid sample (the block start for
  moves to a block: the slew ends there) and the margin covers path sampling
  (PATH_STEP_DEG / 2), the fast Sun's 0.01 deg and the Sun's drift over the
  longest slew or one grid step, whichever is longer.
* Resting: between blocks the dish sits still at its last position (at its
  start position before the first slew, and after the last block). Every grid
  sample from the one at or before it stops through the one at or after the
  next slew leaves must keep the Sun beyond hazard + ``rest_sun_margin_deg``
  (0.01 deg plus the drift over half a step: every instant is within half a
  step of a checked sample). The Sun is followed one day past the period's end,
  since the dish stays where the plan leaves it. Where the dish would rest
  through a closer approach, it goes to ``sunsafety.sun_safe_stow`` first: a
  ``slew`` block (named ``STOW_NAME``; a wrap choice whose path is Sun-safe,
  leaving as soon as the dish stops, or at a later grid sample before the Sun
  arrives if the path is blocked at first) and a ``stow`` block from its
  arrival until the next slew leaves (the end of the period after the last
  one); later slews start from the stow. Stow slews leave when the dish stops,
  so one may run past the end of an availability window: safety first.
* A unit whose end position could not be left for the stow in time (the Sun
  blocking every path) is not chosen; a reference must be reachable without
  the dish resting near the Sun between target and reference. If the start
  position itself is trapped, the plan is refused with a ``UserError``.

Visibility comes from ``planner.surveyvisibility``, the records it builds from
``planner.surveyplan``. Angles in degrees, times as float MJD (UTC).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .earth import unit_vectors
from .errors import UserError
from .site import Site
from .slew import choose_drive_az, slew_model
from .sunsafety import sun_safe_stow
from .surveyplan import MINUTES_PER_DAY, Block, SurveySettings
from .surveyvisibility import (EPS_DAYS, Visibility, next_true, rest_sun_margin_deg, run_lengths,
                               samples_needed, slew_sun_margin_deg)
from .targets import position_name
from .timebase import SECONDS_PER_DAY, iso_utc

LOOKAHEAD_MIN = 60.0
REFERENCE_MAX_WAIT_MIN = 10.0
# How far the resting dish's Sun check may look for a clear path to the stow after
# it stops (grid samples): four hours at one-minute steps; our choice.
STOW_SEARCH_SAMPLES = 240
STOW_NAME = "stow"


def _first_usable(table: np.ndarray, rows: np.ndarray, k: np.ndarray) -> np.ndarray:
    """``table[rows, k]`` for a next-true table, N where k is past the grid."""
    n = table.shape[-1]
    inside = k < n
    out = np.full(k.shape, n, dtype=np.int64)
    out[inside] = table[rows[inside], k[inside]]
    return out


@dataclass(frozen=True)
class _Rest:
    """The dish at rest at (drive azimuth, elevation) since ``since`` (MJD).

    ``danger_k``: the first sample of the continued grid, from the one at or before
    ``since``, at which the Sun is within hazard + rest margin of it (past the grid:
    never). ``route``: how to reach the stow when it must, (leave MJD, drive
    azimuth at the stow, slew seconds), or None.
    """

    az: float
    el: float
    since: float
    danger_k: int
    needs_stow: bool
    route: tuple[float, float, float] | None

    @property
    def trapped(self) -> bool:
        return self.needs_stow and self.route is None


class _Dispatcher:
    """The greedy dispatcher of the module docstring: state of one scheduling run."""

    def __init__(self, site: Site, targets, settings: SurveySettings, vis: Visibility,
                 ref_table: np.ndarray, ref_rows: np.ndarray, remaining: np.ndarray):
        self.site, self.targets, self.settings, self.vis = site, targets, settings, vis
        self.model = slew_model(site)
        self.step_s = settings.step_s
        self.step_d = settings.step_s / SECONDS_PER_DAY
        self.n = vis.mjd_utc.size
        self.lookahead = int(round(LOOKAHEAD_MIN * 60.0 / self.step_s))
        self.ref_wait = int(round(REFERENCE_MAX_WAIT_MIN * 60.0 / self.step_s))
        # Samples from a target's end to the latest start of its reference.
        self.ref_reach = self.ref_wait + int(math.ceil(self.model.max_slew_s / self.step_s)) + 2
        m = len(targets)
        self.minutes = np.array([t.minutes for t in targets], dtype=float)
        self.priority = np.array([t.priority for t in targets], dtype=float)
        self.need = samples_needed(self.minutes, self.step_s)
        self.ref_minutes = (self.minutes if settings.reference_minutes is None
                            else np.full(m, float(settings.reference_minutes)))
        self.ref_need = samples_needed(self.ref_minutes, self.step_s)
        self.ref_table = ref_table  # (R, 4): l, b, ra, dec of reference positions
        self.ref_rows = ref_rows  # (M, J) visibility rows of reference options, -1 = none
        self.run_len = run_lengths(vis.ok)
        mjd = vis.mjd_utc
        fits_window = (mjd[None, :] + self.minutes[:, None] / MINUTES_PER_DAY
                       <= vis.window_end_mjd[None, :] + EPS_DAYS)
        # Target alone: the whole block visible and inside one window.
        self.target_can_start = (self.run_len[:m] >= self.need[:, None] + 1) & fits_window
        self.can_start = self.target_can_start & self._reference_plausible()
        self.next_start = next_true(self.can_start)
        self.startable_after = np.cumsum(self.can_start[:, ::-1], axis=1,
                                         dtype=np.int32)[:, ::-1]
        self.remaining = remaining.astype(int).copy()
        # Feed safety: the Sun on the grid continued one day (east, north, up unit vectors).
        hazard = settings.sun_hazard_deg
        self.slew_clear_deg = hazard + slew_sun_margin_deg(self.model, self.step_s)
        self.rest_cos = math.cos(math.radians(hazard + rest_sun_margin_deg(self.step_s)))
        self.sun_enu = unit_vectors(90.0 - vis.sun_az_deg, vis.sun_alt_deg)
        self.n_ext = vis.sun_alt_deg.size
        self.stow = sun_safe_stow(site)
        self.ref_failed = np.zeros(m, dtype=bool)
        self.unit_ok_ever = np.zeros(m, dtype=bool)
        self.repeat_no = np.zeros(m, dtype=int)

    def _reference_plausible(self) -> np.ndarray:
        """(M, N): some reference option could start soon after a target block starting here.

        A filter, not a guarantee: it lets the dispatcher skip times when no
        reference is up instead of trying them one step at a time.
        """
        m = len(self.targets)
        if self.settings.reference is None:
            return np.ones((m, self.n), dtype=bool)
        ref_any = np.zeros((m, self.n), dtype=bool)
        for j in range(self.ref_rows.shape[1]):  # loop over <= 8 options per target
            rows = self.ref_rows[:, j]
            has = rows >= 0
            ref_any[has] |= self.run_len[rows[has]] >= self.ref_need[has, None] + 1
        reach = self.ref_reach
        next_ref = next_true(ref_any)
        after = np.minimum(np.arange(self.n)[None, :] + self.need[:, None], self.n - 1)
        first = np.take_along_axis(next_ref, after, axis=1)
        return first <= after + reach

    # -- geometry

    def _track(self, rows, k, need, minutes):
        """Start alt/az, least and greatest unwrapped azimuth change, end offset and end alt.

        All (C,) arrays: visibility rows, start samples, steps and minutes of the blocks.
        """
        vis = self.vis
        steps = np.arange(int(need.max()) + 1)
        idx = np.minimum(k[:, None] + steps, self.n - 1)
        az = vis.az_deg[rows[:, None], idx].astype(float)
        alt = vis.alt_deg[rows[:, None], idx].astype(float)
        rel = np.unwrap(az, period=360.0, axis=1)
        rel -= rel[:, :1]
        inside = steps[None, :] <= need[:, None]
        lo = np.where(inside, rel, np.inf).min(axis=1)
        hi = np.where(inside, rel, -np.inf).max(axis=1)
        # The end falls between samples need-1 and need: interpolate (exact on whole steps).
        frac = minutes * 60.0 / self.step_s - (need - 1)
        i = np.arange(len(rows))
        rel_end = rel[i, need - 1] + frac * (rel[i, need] - rel[i, need - 1])
        alt_end = alt[i, need - 1] + frac * (alt[i, need] - alt[i, need - 1])
        return alt[:, 0], az[:, 0], lo, hi, rel_end, alt_end

    def _arrive(self, rows, k, need, minutes, from_az, from_el, free_mjd, next_usable):
        """Earliest usable start samples (>= k) that the dish, free at ``free_mjd``, reaches in time.

        Arguments are (C,) arrays. ``next_usable(i, kk)`` gives the first usable
        start at or after sample kk for entries i (N if none). The slew starts at
        max(free time, start of the window holding the block) and goes to where the
        source is at the block start; a late arrival moves the start on. Returns
        (k, drive azimuth, slew seconds, on_time).
        """
        vis = self.vis
        k = k.astype(np.int64).copy()
        drive = np.full(len(rows), np.nan)
        slew_s = np.full(len(rows), np.inf)
        on_time = np.zeros(len(rows), dtype=bool)
        alive = k < self.n
        for _ in range(6):  # sources move < 0.3 deg per step: two or three rounds settle it
            a = np.flatnonzero(alive & ~on_time)
            if a.size == 0:
                break
            alt0, az0, lo, hi, _, _ = self._track(rows[a], k[a], need[a], minutes[a])
            drive[a], slew_s[a] = choose_drive_az(
                self.model, from_az[a], from_el[a], az0, alt0, lo, hi,
                sun_alt_deg=vis.sun_alt_deg[k[a]], sun_az_deg=vis.sun_az_deg[k[a]],
                sun_clear_deg=self.slew_clear_deg)
            free = np.maximum(free_mjd[a], vis.window_start_mjd[k[a]])
            arrival = free + slew_s[a] / SECONDS_PER_DAY
            good = arrival <= vis.mjd_utc[k[a]] + EPS_DAYS
            on_time[a[good]] = True
            late = a[~good]
            arr = arrival[~good]
            after = np.where(np.isfinite(arr),
                             np.ceil((arr - vis.mjd_utc[0]) / self.step_d - 1e-6), k[late] + 1)
            k[late] = next_usable(late, np.maximum(after.astype(np.int64), k[late] + 1))
            alive[late] = k[late] < self.n
        return k, drive, slew_s, on_time & alive

    # -- feed safety

    def _ceil_k(self, mjd_utc: float) -> int:
        """Index of the first grid sample at or after ``mjd_utc`` (1 ms round-off guard)."""
        return int(math.ceil((mjd_utc - self.vis.mjd_utc[0]) / self.step_d - 1e-6))

    def _floor_k(self, mjd_utc: float) -> int:
        return max(0, int(math.floor((mjd_utc - self.vis.mjd_utc[0]) / self.step_d + 1e-6)))

    def _rest_clear(self, drive_az, el, since, until) -> np.ndarray:
        """(C,) True where a dish resting at (drive az, el) from ``since`` to ``until``
        keeps the Sun beyond hazard + rest margin at every sample from the one at or
        before ``since`` to the one at or after ``until`` (all (C,) arrays)."""
        t0 = self.vis.mjd_utc[0]
        k0 = np.maximum(np.floor((since - t0) / self.step_d + 1e-6), 0).astype(np.int64)
        k1 = np.ceil((until - t0) / self.step_d - 1e-6).astype(np.int64)
        k1 = np.clip(k1, k0, self.n_ext - 1)
        steps = np.arange(int((k1 - k0).max()) + 1)
        idx = np.minimum(k0[:, None] + steps, self.n_ext - 1)
        beam = unit_vectors(90.0 - np.asarray(drive_az, dtype=float), np.asarray(el, dtype=float))
        near = np.einsum("cwi,ci->cw", self.sun_enu[idx], beam) > self.rest_cos
        return ~(near & (steps[None, :] <= (k1 - k0)[:, None])).any(axis=1)

    def _rest(self, drive_az: float, el: float, since: float) -> _Rest:
        """The dish coming to rest: when the Sun would reach it and, if so, its way to the stow."""
        k0 = self._floor_k(since)
        beam = unit_vectors(90.0 - drive_az, el)
        near = np.flatnonzero(self.sun_enu[k0:] @ beam > self.rest_cos)
        if near.size == 0:
            return _Rest(drive_az, el, since, self.n_ext, False, None)
        danger = k0 + int(near[0])
        return _Rest(drive_az, el, since, danger, True,
                     self._stow_route(drive_az, el, since, danger))

    def _stow_route(self, drive_az: float, el: float, since: float, danger_k: int):
        """(leave MJD, drive azimuth, slew s) of a Sun-safe move to the stow, or None.

        Leaves at ``since`` (the Sun taken at the next sample) if a wrap choice's path
        is clear; else at the first later grid sample before ``danger_k`` (and within
        STOW_SEARCH_SAMPLES) at which one is.
        """
        vis, stow = self.vis, self.stow
        k_first = min(self._ceil_k(since), self.n_ext - 1)
        later = np.arange(k_first + 1, min(danger_k, k_first + 1 + STOW_SEARCH_SAMPLES,
                                           self.n_ext))
        for ks, at_once in ((np.array([k_first]), True), (later, False)):
            if ks.size == 0:
                continue
            drive, slew_s = choose_drive_az(self.model, drive_az, el, stow.az_deg, stow.alt_deg,
                                            sun_alt_deg=vis.sun_alt_deg[ks],
                                            sun_az_deg=vis.sun_az_deg[ks],
                                            sun_clear_deg=self.slew_clear_deg)
            ok = np.flatnonzero(np.isfinite(slew_s))
            if ok.size:
                j = int(ok[0])
                leave = since if at_once else float(vis.mjd_utc[0] + self.step_d * ks[j])
                return leave, float(drive[j]), float(slew_s[j])
        return None

    def _stow(self, blocks: list[Block], rest: _Rest, t: float):
        """Send the resting dish to the stow: append the slew and an open stow block.

        Returns the new free time, position, rest and the stow block's index.
        """
        leave, drive, slew_s = rest.route
        arrive = leave + slew_s / SECONDS_PER_DAY
        alt, az = float(self.stow.alt_deg), float(self.stow.az_deg) % 360.0
        nowhere = dict(l_deg=None, b_deg=None, ra_deg=None, dec_deg=None)
        if slew_s > 0:
            blocks.append(Block(
                kind="slew", name=STOW_NAME, target=-1, start_mjd=leave, end_mjd=arrive,
                **nowhere, alt_start_deg=rest.el, alt_end_deg=alt,
                az_start_deg=rest.az % 360.0, az_end_deg=az, drive_az_start_deg=rest.az,
                drive_az_end_deg=drive))
        blocks.append(Block(
            kind="stow", name=STOW_NAME, target=-1, start_mjd=arrive, end_mjd=arrive, **nowhere,
            alt_start_deg=alt, alt_end_deg=alt, az_start_deg=az, az_end_deg=az,
            drive_az_start_deg=drive, drive_az_end_deg=drive))
        after = self._rest(drive, alt, arrive)
        if after.needs_stow:  # sun_safe_stow keeps > 45 deg; only an odd site gets here
            raise UserError(f"site: the Sun comes within {self.settings.sun_hazard_deg:g}° of "
                            f"the stow position (elevation {alt:.1f}°, azimuth {az:.1f}°); "
                            "lower sun_hazard_deg")
        return max(t, arrive), drive, alt, after, len(blocks) - 1

    def _close_stow(self, blocks: list[Block], i: int, end_mjd: float) -> None:
        """End stow block i at ``end_mjd``, with the Sun's least distance over it."""
        b = blocks[i]
        end_mjd = max(end_mjd, b.start_mjd)
        k0 = self._floor_k(b.start_mjd)
        k1 = max(k0, min(self._ceil_k(end_mjd), self.n_ext - 1))
        beam = unit_vectors(90.0 - b.drive_az_start_deg, b.alt_start_deg)
        cos_max = float(np.max(self.sun_enu[k0:k1 + 1] @ beam))
        blocks[i] = replace(b, end_mjd=end_mjd,
                            sun_sep_min_deg=math.degrees(math.acos(min(1.0, max(-1.0, cos_max)))))

    # -- candidate units

    def _units(self, cand, k, t, pos_az, pos_el) -> dict:
        """Target blocks (and their references) for candidates ``cand`` from time t."""
        vis, c_n = self.vis, len(cand)
        need, minutes = self.need[cand], self.minutes[cand]
        k, drive, slew_s, ok = self._arrive(
            cand, k, need, minutes, np.full(c_n, pos_az), np.full(c_n, pos_el), np.full(c_n, t),
            lambda i, kk: _first_usable(self.next_start, cand[i], kk))
        kk = np.minimum(k, self.n - 1)
        end_mjd = vis.mjd_utc[kk] + minutes / MINUTES_PER_DAY
        u = {"cand": cand, "k": k, "drive": drive, "slew_s": slew_s, "ok": ok,
             "end_mjd": end_mjd, "unit_end_mjd": end_mjd.copy(),
             "ref_row": np.full(c_n, -1), "ref_k": np.full(c_n, -1),
             "ref_drive": np.full(c_n, np.nan), "ref_slew_s": np.zeros(c_n)}
        if self.settings.reference is None or not ok.any():
            return u
        a = np.flatnonzero(ok)
        _, _, _, _, rel_end, alt_end = self._track(cand[a], k[a], need[a], minutes[a])
        end_drive = drive[a] + rel_end
        # Every (candidate, reference option) pair at once.
        options = self.ref_rows[cand[a]]
        pair_c, pair_j = np.nonzero(options >= 0)
        rows = options[pair_c, pair_j]
        owner = cand[a][pair_c]
        r_need, r_min = self.ref_need[owner], self.ref_minutes[owner]
        t_end = end_mjd[a][pair_c]
        w_end = vis.window_end_mjd[k[a]][pair_c]
        k0 = np.ceil((t_end - vis.mjd_utc[0]) / self.step_d - 1e-6).astype(np.int64)
        reach = self.ref_reach
        steps = np.arange(reach)
        idx = k0[:, None] + steps
        safe = np.minimum(idx, self.n - 1)
        fits = ((idx < self.n)
                & (self.run_len[rows[:, None], safe] >= r_need[:, None] + 1)
                & (vis.mjd_utc[safe] + r_min[:, None] / MINUTES_PER_DAY
                   <= w_end[:, None] + EPS_DAYS))
        first_fit = next_true(fits)  # (pairs, reach): first fitting step at or after each

        def next_ref(i, kk):
            off = kk - k0[i]
            out = np.full(len(i), self.n, dtype=np.int64)
            inside = (off >= 0) & (off < reach)
            hit = first_fit[i[inside], off[inside]]
            out[inside] = np.where(hit < reach, k0[i[inside]] + hit, self.n)
            return out

        pairs = np.arange(len(rows))
        start = next_ref(pairs, k0)
        rk, rdrive, rslew, rok = self._arrive(rows, start, r_need, r_min, end_drive[pair_c],
                                              alt_end[pair_c], t_end, next_ref)
        rkk = np.minimum(rk, self.n - 1)
        # Switching wants the reference soon after the target: limit the wait on arrival.
        rok &= vis.mjd_utc[rkk] <= t_end + rslew / SECONDS_PER_DAY + self.ref_wait * self.step_d \
            + EPS_DAYS
        # The dish rests at the target's end position until the reference slew leaves.
        waits = np.flatnonzero(rok)
        if waits.size:
            leave = vis.mjd_utc[rkk[waits]] - rslew[waits] / SECONDS_PER_DAY
            rok[waits] = self._rest_clear(end_drive[pair_c[waits]], alt_end[pair_c[waits]],
                                          t_end[waits], leave)
        ref_end = np.where(rok, vis.mjd_utc[rkk] + r_min / MINUTES_PER_DAY, np.inf)
        # Per candidate: the option that ends first; ties keep the preference order.
        order = np.lexsort((pair_j, ref_end, pair_c))
        _, first = np.unique(pair_c[order], return_index=True)
        best = order[first]  # one pair per candidate that has any option
        has = np.isfinite(ref_end[best])
        sel = a[pair_c[best]]
        self.ref_failed[cand[sel[~has]]] = True
        u["ok"][sel[~has]] = False
        p, s = best[has], sel[has]
        u["ref_row"][s], u["ref_k"][s] = rows[p], rk[p]
        u["ref_drive"][s], u["ref_slew_s"][s] = rdrive[p], rslew[p]
        u["unit_end_mjd"][s] = ref_end[p]
        no_option = np.setdiff1d(a, sel)
        u["ok"][no_option] = False
        return u

    def _scores(self, u: dict, t: float) -> np.ndarray:
        """priority * efficiency * (1 + urgency), -inf for infeasible units."""
        ok = u["ok"]
        c = u["cand"]
        kk = np.minimum(u["k"], self.n - 1)
        unit_s = np.maximum((u["unit_end_mjd"] - t) * SECONDS_PER_DAY, 1e-9)
        efficiency = self.minutes[c] * 60.0 / unit_s
        length_s = (u["unit_end_mjd"] - self.vis.mjd_utc[kk]) * SECONDS_PER_DAY
        left_s = self.startable_after[c, kk] * self.step_s
        urgency = np.minimum(1.0, length_s * self.remaining[c] / np.maximum(left_s, self.step_s))
        return np.where(ok, self.priority[c] * efficiency * (1.0 + urgency), -np.inf)

    # -- main loop

    def run(self, start_az: float, start_el: float) -> list[Block]:
        vis = self.vis
        mjd = vis.mjd_utc
        blocks: list[Block] = []
        t, pos_az, pos_el = float(mjd[0]), start_az, start_el
        rest = self._rest(pos_az, pos_el, t)
        if rest.trapped:
            raise UserError(
                f"site [pointing]: the Sun comes within {self.settings.sun_hazard_deg:g}° of "
                f"the dish's start position (elevation {pos_el:.1f}°, azimuth "
                f"{pos_az % 360.0:.1f}°) on {iso_utc(float(mjd[min(rest.danger_k, self.n - 1)]))} "
                "and no Sun-safe path to the stow position is clear before then; stow the dish "
                "or start the plan at another time")
        stow_at: int | None = None  # index of the open stow block
        max_slew_d = self.model.max_slew_s / SECONDS_PER_DAY
        while True:
            active = np.flatnonzero(self.remaining > 0)
            if active.size == 0:
                break
            k_now = self._ceil_k(t)
            if k_now >= self.n:
                break
            if k_now >= rest.danger_k:  # any slew from here leaves too late: stow first
                t, pos_az, pos_el, rest, stow_at = self._stow(blocks, rest, t)
                continue
            first = self.next_start[active, k_now]
            possible = first < self.n
            if not possible.any():
                break
            k_first = int(first[possible].min())
            if k_first > k_now + self.lookahead:
                t = max(t, float(mjd[k_first]) - max_slew_d)  # idle until then
                continue
            pick = possible & (first <= k_now + self.lookahead)
            cand = active[pick]
            u = self._units(cand, first[pick].astype(np.int64), t, pos_az, pos_el)
            self.unit_ok_ever[cand[u["ok"]]] = True
            score = self._scores(u, t)
            chosen, after = self._choose(u, score, t, rest)
            if chosen is None:
                t = float(mjd[k_now]) + self.step_d
                continue
            if after is None:  # the dish would rest here through a close approach
                t, pos_az, pos_el, rest, stow_at = self._stow(blocks, rest, t)
                continue
            if stow_at is not None:
                self._close_stow(blocks, stow_at, self._departure(u, chosen))
                stow_at = None
            t, pos_az, pos_el = self._commit(u, chosen, t, pos_az, pos_el, blocks)
            rest = after
        if rest.danger_k < self.n_ext and stow_at is None:
            t, pos_az, pos_el, rest, stow_at = self._stow(blocks, rest, t)
        if stow_at is not None:
            self._close_stow(blocks, stow_at, max(self.settings.end_mjd, blocks[stow_at].start_mjd))
        return blocks

    def _choose(self, u: dict, score: np.ndarray, t: float, rest: _Rest):
        """(unit index, rest after it) to commit; (None, None) when none is feasible.

        (i, None): the best unit leaves after the Sun reaches the resting dish, so
        the dish must stow first. Units whose end position is trapped (the Sun would
        reach it before any path to the stow clears) are dropped.
        """
        score = score.copy()
        while np.isfinite(score).any():
            best = int(np.argmax(score))
            chosen = self._fill_gap(u, score, best, t)
            if self._ceil_k(self._departure(u, chosen)) >= rest.danger_k:
                return chosen, None
            end_az, end_el = self._unit_end_position(u, np.array([chosen]))
            after = self._rest(float(end_az[0]), float(end_el[0]),
                               float(u["unit_end_mjd"][chosen]))
            if not after.trapped:
                return chosen, after
            score[chosen] = -np.inf
        return None, None

    def _departure(self, u: dict, i: int) -> float:
        """When the first slew of unit i leaves (its block start if there is no slew)."""
        return float(self.vis.mjd_utc[int(u["k"][i])]) - float(u["slew_s"][i]) / SECONDS_PER_DAY

    def _fill_gap(self, u: dict, score: np.ndarray, best: int, t: float) -> int:
        """Another unit to do first when the best one must wait and the wait is long enough."""
        vis = self.vis
        k_b = int(u["k"][best])
        free_b = max(t, float(vis.window_start_mjd[k_b]))
        wait_d = vis.mjd_utc[k_b] - (free_b + u["slew_s"][best] / SECONDS_PER_DAY)
        if wait_d <= self.step_d:
            return best
        others = np.flatnonzero(np.isfinite(score) & (u["unit_end_mjd"] <= vis.mjd_utc[k_b]))
        others = others[others != best]
        if others.size == 0:
            return best
        # Where the dish ends after each other unit, then the move to the best one's start.
        c_b = u["cand"][best]
        alt0, az0, lo, hi, _, _ = self._track(np.array([c_b]), np.array([k_b]),
                                              self.need[[c_b]], self.minutes[[c_b]])
        end_az, end_el = self._unit_end_position(u, others)
        _, move_s = choose_drive_az(self.model, end_az, end_el, az0[0], alt0[0], lo[0], hi[0],
                                    sun_alt_deg=vis.sun_alt_deg[k_b],
                                    sun_az_deg=vis.sun_az_deg[k_b],
                                    sun_clear_deg=self.slew_clear_deg)
        free = np.maximum(u["unit_end_mjd"][others], vis.window_start_mjd[k_b])
        fits = free + move_s / SECONDS_PER_DAY <= vis.mjd_utc[k_b] + EPS_DAYS
        if not fits.any():
            return best
        fitting = others[fits]
        return int(fitting[np.argmax(score[fitting])])

    def _unit_end_position(self, u: dict, sel: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Drive azimuth and elevation of the dish at the end of units ``sel``."""
        c = u["cand"][sel]
        has_ref = u["ref_row"][sel] >= 0
        az = np.empty(len(sel))
        el = np.empty(len(sel))
        t_only = ~has_ref
        if t_only.any():
            s = sel[t_only]
            _, _, _, _, rel_end, alt_end = self._track(c[t_only], u["k"][s], self.need[c[t_only]],
                                                       self.minutes[c[t_only]])
            az[t_only], el[t_only] = u["drive"][s] + rel_end, alt_end
        if has_ref.any():
            s = sel[has_ref]
            cr = c[has_ref]
            _, _, _, _, rel_end, alt_end = self._track(u["ref_row"][s], u["ref_k"][s],
                                                       self.ref_need[cr], self.ref_minutes[cr])
            az[has_ref], el[has_ref] = u["ref_drive"][s] + rel_end, alt_end
        return az, el

    def _commit(self, u: dict, i: int, t: float, pos_az: float, pos_el: float,
                blocks: list[Block]) -> tuple[float, float, float]:
        """Append the slew(s) and block(s) of unit i; return the new free time and position."""
        c = int(u["cand"][i])
        self.remaining[c] -= 1
        self.repeat_no[c] += 1
        target = self.targets[c]
        pos_az, pos_el, end = self._place(blocks, "target", c, c, int(u["k"][i]),
                                          self.need[c], self.minutes[c], float(u["drive"][i]),
                                          float(u["slew_s"][i]), pos_az, pos_el, target.name)
        if u["ref_row"][i] >= 0:
            row = int(u["ref_row"][i])
            pos_az, pos_el, end = self._place(blocks, "reference", c, row, int(u["ref_k"][i]),
                                              self.ref_need[c], self.ref_minutes[c],
                                              float(u["ref_drive"][i]),
                                              float(u["ref_slew_s"][i]), pos_az, pos_el,
                                              target.name)
        return end, pos_az, pos_el

    def _place(self, blocks, kind, c, row, k, need, minutes, drive, slew_s, from_az, from_el,
               target_name):
        vis = self.vis
        start = float(vis.mjd_utc[k])
        end = start + float(minutes) / MINUTES_PER_DAY
        alt0, az0, _, _, rel_end, alt_end = self._track(np.array([row]), np.array([k]),
                                                        np.array([need]), np.array([minutes]))
        l_deg, b_deg, ra, dec, name = self._position(row)
        geo = dict(l_deg=l_deg, b_deg=b_deg, ra_deg=ra, dec_deg=dec)
        if slew_s > 0:
            blocks.append(Block(
                kind="slew", name=name, target=c, start_mjd=start - slew_s / SECONDS_PER_DAY,
                end_mjd=start, **geo, alt_start_deg=float(from_el), alt_end_deg=float(alt0[0]),
                az_start_deg=float(from_az % 360.0), az_end_deg=float(az0[0]),
                drive_az_start_deg=float(from_az), drive_az_end_deg=drive,
                reference_for=target_name if kind == "reference" else None))
        span = slice(k, min(k + need + 1, self.n))
        moon = (float(vis.moon_sep_deg[row, span].min())
                if self.settings.moon_min_sep_deg > 0 else None)
        end_drive = drive + float(rel_end[0])
        blocks.append(Block(
            kind=kind, name=name, target=c, start_mjd=start, end_mjd=end, **geo,
            alt_start_deg=float(alt0[0]), alt_end_deg=float(alt_end[0]),
            az_start_deg=float(az0[0]), az_end_deg=float(end_drive % 360.0),
            drive_az_start_deg=drive, drive_az_end_deg=end_drive,
            sun_sep_min_deg=float(vis.sun_sep_deg[row, span].min()), moon_sep_min_deg=moon,
            repeat=int(self.repeat_no[c]),
            reference_for=target_name if kind == "reference" else None))
        return end_drive, float(alt_end[0]), end

    def _position(self, row: int):
        m = len(self.targets)
        if row < m:
            t = self.targets[row]
            return t.l_deg, t.b_deg, t.ra_deg, t.dec_deg, t.name
        l_deg, b_deg, ra, dec = self.ref_table[row - m]
        return l_deg, b_deg, ra, dec, position_name(l_deg, b_deg)
