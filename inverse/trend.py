"""Statistics of a trend over a log: the reference window, the strengths, the change flags.

Works on window statistics (inverse.steady.WindowStats) and arrays; no files.

- Reference window (`choose_reference`): the first steady window that has settled (largest
  drift at most REFERENCE_DRIFT_FRACTION x the drift limit); else the first steady window,
  with a warning; else (only when streaming every Nth row) the steadiest complete window.
- Model (`TrendModel.build`): the reference window is fitted as `fit` would (sensor
  screening), which fixes the sensors of the whole trend; the absolute figures of every row
  carry what that fit holds beyond the trend's single prior (BatchSolver.with_fit_uncertainty:
  the learned prior's left-out modes, an unseen stretch's steps, its hyperparameters' spread),
  so that the reference row's sds are at least the fit's; changes do not (it cancels).  Strength: the one the joint evidence of all steady windows
  prefers (windows mode, when the fit's rule is the evidence), else the reference window's own
  choice.  Changes from the reference are estimated from the readings' difference
  d_row - d_ref (offsets cancel) with variance S_row + S_ref: a smooth change plus a step
  over each declared zone, the steps' scale and edge width (`change_priors`) and the
  strength weighed by the joint evidence of the other steady windows' differences that
  depart beyond the noise (windows mode), else averaged over by each row's own evidence
  (CHANGE_RULE).  Before they are inverted, each row's readings are
  checked against each other (RowChecks): a sensor failing partway through the log is left
  out of the rows where it disagrees, not read as a heater's change.
- Flags (`ChangeFlags`): |change| / sd(change) > Phi^-1(1 - level / (2 m)), m = rows x zones
  (Bonferroni, family-wise TREND_FAMILY_LEVEL); rows before the reference (the part still
  settling) are never flagged.  Each flag's support (`TrendModel.flag_support`, case
  deletion as in regression diagnostics): the flagged row is solved again with each reading
  left out in turn; a flag whose zone shows no change without one sensor (within LONE_SCORE
  sd of none) rests on that sensor alone, and a drifting or loose thermocouple there would
  look the same.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .bands import Z95
from .batch import TREND_FAMILY_LEVEL, BatchSolver, change_threshold, solve_mixture, solve_weighted
from .diagnostics import model_suspect
from .errors import InverseError
from .readings import MIN_READINGS, SensorReadings
from .steady import MIN_SAMPLES

#: the reference is the first steady window whose largest drift is at most this fraction of
#: the drift limit: a window just inside the limit may still be settling, and a baseline must
#: not (common practice, no source)
REFERENCE_DRIFT_FRACTION = 0.25
#: when streaming every Nth row, rows wait for the first steady window; past this many the
#: steadiest complete window so far becomes the reference
MAX_PENDING_ROWS = 200_000
#: display grid (radial or axial, angular) of a reference fit whose map nobody sees: the first
#: of the two fits when the strength then comes from all steady windows
PROBE_GRID = (3, 4)
#: flagged rows of one batch examined for their support (TrendModel.flag_support), evenly
#: spread: each costs one solve per sensor
SUPPORT_ROWS = 32
#: a flag rests on one sensor when, without its reading, the zone's change is within this many
#: of its sd of none (the others see no change there, at about 95 %; common practice, no source)
LONE_SCORE = 2.0


#: how a change's strength is set when no difference to the reference departs beyond the noise
#: (or when streaming every Nth row, where no later window can be looked at): each row's change
#: is averaged over a log-spaced grid of strengths (BatchSolver.strength_grid, uniform in log
#: alpha over the range where the evidence moves) and over the change priors (STEP_FACTORS,
#: edge widths), weighted by that row's own evidence (batch.solve_mixture).  Until session 33
#: half the trend's strength was used: when the offsets hide the profile the reference fit sits
#: at its stiffest, and on the demo platen a 10 % loss of one sector came out as -226 +- 6 W/m^2
#: in every zone, all five flagged, where one zone lost 1043.  In windows mode the joint
#: evidence of the differences that depart sets the strength; until session 32 every steady
#: window's difference voted, and on an 8-hour log whose last window lost 10 % in one sector
#: the strength came out 1e10 times the trend's, the change uniform over every zone (-60 +- 5
#: W/m^2 each, where one zone lost 299 W/m^2).
CHANGE_RULE = "each row's own evidence, averaged over {num} strengths from {lo:.3g} to {hi:.3g} (uniform in log)"
#: the zones' steps' prior variance in a change, in units of their zone mean's variance under
#: the smooth change prior at the smooth change's own strength (BatchSolver.changes'
#: step_factor), weighed with the zone model's edge widths by the evidence (`change_priors`);
#: the smooth change keeps the strength it takes alone (factor 1).  Until session 34 the factor
#: was 1 and the steps sharp: a sector 20 % weak that is exactly a declared zone came out -2211
#: +- 53 W/m^2 against -2400 (3.6 sd).  A wide range (1e-2 .. 1e6, each factor at its own best
#: strength) was tried in session 34 and dropped: the evidence chose "steps alone" (the smooth
#: part stiffened to nothing), and a loss covering part of a zone was given to the whole zone
#: with a tight sd (finite-element heaters: 4-12 sd off; the same loss 0.2-1.9 sd off with
#: factor 1).  Within a factor of 10 of the tied prior the sharp sector is -2350 +- 43 and the
#: finite-element cases stay within 2.4 sd (DEVELOPERS.md).
STEP_FACTORS = (0.1, 1.0, 10.0)
#: strengths per change prior a row's own evidence averages over (CHANGE_RULE), with the
#: narrowest and widest edge settings only (change_priors' ends_only): the products of every
#: pair cost in proportion to their number, and the middle edge setting moved no figure of
#: session 34's cases by more than 0.2 sd (54 pairs, where 81 cost a third more)
ROW_PRIOR_STRENGTHS = 9
#: change priors whose joint evidence is below this fraction of the best one's are left out
#: of the weighed change (their weight is negligible)
CHANGE_PRIOR_CUT = 1e-4
WEIGHED_RULE = (", weighing {num} of {of} change priors by that evidence (the heaviest: the zones' steps at "
                "{factor:.3g} times their smooth variance, edges up to {edge:.3g} mm wide)")
STEP_RULE = (", and over {num} scales of the zones' steps from {lo:.3g} to {hi:.3g} times their smooth variance "
             "and {edges} edge widths")


class TrendError(InverseError):
    """The log cannot give a trend (no steady window, too few sensors); the message says why."""


@dataclass
class SensorSet:
    """The logged sensors: ids, positions r, theta, z [m, rad, m], the random sd of a single
    logged reading [K] and the placement tolerance [m]."""

    names: list
    r: np.ndarray
    theta: np.ndarray
    z: np.ndarray
    reading_sigma: np.ndarray
    position_tolerance: np.ndarray


def choose_reference(stats, drift_limit: float, *, final: bool, pending_rows: int = 0,
                     window: float | None = None, names=()) -> tuple[int | None, list[str]]:
    """(index of the reference window or None while waiting for more data, warnings).

    stats: WindowStats so far; final: the whole log has been read; pending_rows: rows waiting
    (streaming mode; the steadiest complete window is taken once MAX_PENDING_ROWS wait);
    window: the window length [s] for messages (default stats.window); names: sensor ids."""
    window = stats.window if window is None else window
    steady = np.flatnonzero(stats.steady(drift_limit))
    drift = stats.max_drift()
    settled = steady[drift[steady] <= REFERENCE_DRIFT_FRACTION * drift_limit]
    if settled.size:
        return int(settled[0]), []
    waiting = not final and pending_rows < MAX_PENDING_ROWS
    where = "in the log" if final else f"in its first {pending_rows} rows"
    if steady.size:
        if waiting:
            return None, []
        i = int(steady[0])
        return i, [f"no steady window drifts less than {REFERENCE_DRIFT_FRACTION * drift_limit:.3g} K {where}; "
                   f"the reference, the first steady window (t = {stats.start[i]:.6g} to {stats.end[i]:.6g} s, "
                   f"drift {drift[i]:.3g} K), may still be settling, and its settling shows in every change"]
    if waiting:
        return None, []
    complete = np.flatnonzero(stats.complete & stats.valid.any(axis=1))
    if not complete.size:
        if final:
            raise no_steady_window(stats, drift_limit, window, names)
        return None, []
    i = int(complete[np.argmin(drift[complete])])
    return i, [f"no steady window (every sensor within {drift_limit:g} K over {window:g} s) was found {where}; "
               f"changes are relative to the steadiest window, t = {stats.start[i]:.6g} to {stats.end[i]:.6g} s, "
               f"which drifts {drift[i]:.3g} K"]


def no_steady_window(stats, drift_limit: float, window: float, names) -> TrendError:
    """The error for a log without a steady window, naming the steadiest one and the --drift
    that would accept it."""
    complete = stats.complete & stats.valid.any(axis=1)
    if not complete.any():
        span = stats.end.max() - stats.start.min() if stats.size else 0
        rows = int(stats.n_rows.sum()) if stats.size else 0
        step = span / (rows - 1) if rows > 1 else math.inf
        if rows < MIN_SAMPLES:
            return TrendError(f"the log has {rows} row{'' if rows == 1 else 's'}; a trend needs at least "
                              f"{MIN_SAMPLES} in one window of {window:g} s (its reference), and more after it "
                              f"to follow (fit takes a single snapshot)")
        if span >= window and step > window / (MIN_SAMPLES - 1) / 1.001:
            # the rows lie too far apart for MIN_SAMPLES of them in one window
            longer = float(f"{MIN_SAMPLES * step:.2g}")
            return TrendError(f"the log's rows are about {step:.3g} s apart, too far apart for {MIN_SAMPLES} of them "
                              f"in a window of {window:g} s; give a longer --window (at least {longer:g} s)")
        return TrendError(f"no complete window of {window:g} s in the log (it spans {span:.6g} s); "
                          f"give a shorter --window")
    md = np.where(complete, stats.max_drift(), np.inf)
    i = int(np.argmin(md))
    worst = int(np.nanargmax(np.where(stats.valid[i], stats.drift[i], -np.inf)))
    name = names[worst] if worst < len(names) else str(worst + 1)
    suggest = float(f"{md[i] * 1.25:.2g}")
    return TrendError(
        f"no steady window: in every {window:g}-s window some sensor drifts by {drift_limit:g} K or "
        f"more (the steadiest window, t = {stats.start[i]:.6g} to {stats.end[i]:.6g} s, drifts "
        f"{md[i]:.3g} K at sensor {name}); if that is steady enough for you, give "
        f"--drift {suggest:g}, or let the part settle longer")


@dataclass
class TrendModel:
    """What the reference window fixes for the whole trend.

    result: the reference fit (FitResult, as `fit` makes it); used (n,) bool: sensors kept
    (set_aside: the others, by either fit); solver, changes: BatchSolvers of absolute values
    (at the trend's strength, carrying the reference fit's further uncertainty) and of changes; tau (n,) offset sd [K]; ref_window
    (start, end) [s]; ref_d, ref_rv: reference readings [K] and their random variances [K^2]
    of the used sensors; strength_rule, change_rule: how the strengths were chosen."""

    result: object
    used: np.ndarray
    solver: BatchSolver
    changes: BatchSolver
    tau: np.ndarray
    ref_window: tuple
    ref_d: np.ndarray
    ref_rv: np.ndarray
    strength_rule: str
    change_rule: str
    warnings: list = field(default_factory=list)
    set_aside: list = field(default_factory=list)    # sensors left out of the trend
    # [(change solver, strengths)]: each row's own evidence averages over these (CHANGE_RULE)
    change_mixture: list | None = None
    change_step_factor: float | None = None   # the zones' steps' variance factor of the heaviest weighed prior
    change_weighed: list | None = None   # [(change solver, log evidence)]: the priors the joint evidence weighs

    @property
    def zone_names(self) -> list:
        return list(self.solver.change_names)

    @classmethod
    def build(cls, fit, stats, i: int, sensors: SensorSet, offset_sd, *, floor: float, zones=(),
              steady=None, joint_evidence: bool = True, streaming_hint: bool = False) -> "TrendModel":
        """Fit the reference window i and fix the sensors and strengths.

        fit(readings, strength, **overrides) -> FitResult (strength None: the case's rule;
        overrides: inverse.fit's, here the display grid); offset_sd(level
        (n,) [K]) -> (tau (n,) [K], notes); steady: indices of every steady window (windows
        mode) for the joint evidence, used when joint_evidence (the case asks for the
        evidence), else None (streaming: the reference window's own choice stands)."""
        warnings: list[str] = []
        ref_window = (float(stats.start[i]), float(stats.end[i]))
        valid, mean = stats.valid[i], stats.mean[i]
        sig = stats.sigma(floor)[i]
        if valid.sum() < MIN_READINGS:
            raise TrendError(f"the reference window (t = {ref_window[0]:.6g} to {ref_window[1]:.6g} s) has only "
                             f"{int(valid.sum())} sensor(s) with readings; a fit needs at least {MIN_READINGS}")
        level = np.where(valid, mean, np.nanmean(np.where(valid, mean, np.nan)))
        tau, notes = offset_sd(level)
        warnings.extend(notes)
        s = sensors
        k = np.flatnonzero(valid)
        rd = SensorReadings([s.names[j] for j in k], s.r[k], s.theta[k], s.z[k], mean[k], sig[k], tau[k],
                            s.position_tolerance[k])

        def solver_for(result, aside, like=None):
            u = np.array([n not in aside for n in s.names])
            return u, BatchSolver.from_fit(result, s.r[u], s.theta[u], s.z[u], offset_sd=tau[u],
                                           position_tolerance=s.position_tolerance[u], zones=zones, like=like)

        # the reference fit, as `fit` makes it: the answer shown for the reference window, and
        # what the trend's absolute figures carry beyond its single prior (with_fit_uncertainty)
        result = fit(rd, None)
        aside = set(result.summary["set_aside"])
        used, solver = solver_for(result, aside)
        joint = steady is not None and joint_evidence
        strength_rule = f"{result.summary['strength_method']} of the reference window"
        sig2 = stats.sigma(floor) ** 2
        means = np.where(stats.valid, stats.mean, np.nan)
        if joint:
            # the windows' readings checked against each other first (RowChecks, at the
            # reference fit's strength): a sensor failing partway through the log must not set
            # the strength of every row
            X, RV = means[steady][:, used], sig2[steady][:, used]
            X = RowChecks([n for n, u in zip(s.names, used) if u], len(steady)).clean(
                solver.changes(), np.where(valid, mean, np.nan)[used], np.where(valid, sig ** 2, np.nan)[used],
                stats.start[steady], X, RV, reference_mask=(steady == i))
            alpha, notes = solver.joint_strength(X, RV)
            warnings.extend(notes)
            # the fit at the joint strength gives the trend's solver and its screening; its face
            # map is never shown, so it is evaluated on a token grid
            fixed = fit(rd, alpha, grid=PROBE_GRID)
            aside |= set(fixed.summary["set_aside"])
            used, solver = solver_for(fixed, aside, like=solver)
            strength_rule = f"joint evidence of the {len(steady)} steady windows"
        shown = set(result.summary["set_aside"])
        for name in sorted(aside):
            warnings.append(f"sensor {name} was set aside in the reference window and is left out of the trend"
                            if name in shown else
                            f"sensor {name} was set aside at the trend's smoothing strength and is left out of "
                            f"the trend (the reference window's fit shown keeps it)")
        edf = float((fixed if joint else result).summary["effective_parameters"])
        if edf < 2.0 and solver.change_names:
            cure = ("run without --every (the strength then comes from all steady windows) or fix [fit] "
                    "strength in the case" if steady is None else "fix [fit] strength in the case to resolve zones")
            warnings.append(f"at the trend's smoothing strength the fit has only {edf:.2g} effective "
                            "parameters: the trend resolves little beyond the face mean, and a change of "
                            f"one zone shows in all of them; {cure}")
        ref_d = np.where(valid, mean, np.nan)[used]
        ref_rv = np.where(valid, sig ** 2, np.nan)[used]
        solver = solver.with_fit_uncertainty(result, ref_d, np.where(np.isfinite(ref_rv), ref_rv, 1.0))
        changes = solver.changes()
        # the grids span the noise of a single reading's difference (streaming) and of a window
        # mean's (windows mode)
        single = np.asarray(s.reading_sigma, float)[used] ** 2
        pair = np.vstack([single, np.where(np.isfinite(ref_rv), ref_rv, single)]) + np.nan_to_num(ref_rv)
        priors = change_priors(solver)
        chosen, weighted, mixture = None, None, None
        others = [] if steady is None else [w for w in steady if w != i]
        if others and joint_evidence:
            # the joint evidence of the differences that changed beyond the noise other than by
            # a scaling of the nominal profile (BatchSolver.departing_rows), checked first
            # (RowChecks): windows that did not change would each vote for no change at all,
            # which leaves a change only the nearly free nominal direction
            X, RV = means[others][:, used] - ref_d, sig2[others][:, used] + ref_rv
            X = RowChecks([n for n, u in zip(s.names, used) if u], len(others)).clean(
                changes, np.zeros(X.shape[1]), np.zeros(X.shape[1]), stats.start[others], X, RV)
            moved = changes.departing_rows(X, RV, level=TREND_FAMILY_LEVEL / len(others))
            if moved.any():
                weighted, chosen, notes = _joint_change_prior(solver, priors, X[moved], RV[moved])
                warnings.extend(notes)
                changes = max(weighted, key=lambda p: p[1])[0]
                change_rule = (f"joint evidence of the {int(moved.sum())} of {len(others)} differences to the "
                               f"reference window that changed beyond the noise")
                if len(priors) > 1:
                    change_rule += WEIGHED_RULE.format(num=len(weighted), of=len(priors), factor=chosen[1],
                                                       edge=1e3 * solver.step_edge_width(chosen[0]))
        if weighted is None:
            # each row's own evidence over the priors, at the strengths where the smooth change's
            # own evidence moves
            grid = changes.strength_grid(pair, num=ROW_PRIOR_STRENGTHS)
            row_priors = change_priors(solver, ends_only=True)
            mixture = [(solver.changes(step_factor=f, edge=e), grid) for e, f in row_priors]
            change_rule = CHANGE_RULE.format(num=grid.size, lo=grid[0], hi=grid[-1])
            if len(row_priors) > 1:
                change_rule += STEP_RULE.format(num=len(STEP_FACTORS), lo=STEP_FACTORS[0], hi=STEP_FACTORS[-1],
                                                edges=len({e for e, _ in row_priors}))
        return cls(result, used, solver, changes, tau, ref_window, ref_d, ref_rv, strength_rule, change_rule,
                   warnings, sorted(aside), mixture, None if chosen is None or len(priors) == 1 else chosen[1],
                   weighted)

    def checked(self, checks, start, d, rv, reference_mask=None):
        """Rows d (R, used) [K] with the readings a RowChecks sets aside as NaN (rv: their random
        variances [K^2]; start (R,) [s]), against this trend's change solver and reference."""
        return checks.clean(self.changes, self.ref_d, self.ref_rv, start, d, rv, reference_mask)

    def changes_of(self, d, rv, reference_mask=None):
        """Changes of each zone from the reference and their sd (the change solver's), (R, zones) each:
        d (R, used) readings [K], rv ((used,) or (R, used)) their random variances [K^2];
        rows in reference_mask (the reference window itself) are exactly 0 +- 0."""
        var = rv + self.ref_rv
        if np.ndim(var) == 1 and not np.all(np.isfinite(var)):
            # a sensor without a reading in the reference window has no change (its difference
            # is NaN, so every row leaves it out); its variance only has to be a number
            var = np.where(np.isfinite(var), var, 1.0)
        if self.change_mixture is not None:
            ch = solve_mixture(self.change_mixture, d - self.ref_d, var)
        elif self.change_weighed is not None and len(self.change_weighed) > 1:
            ch = solve_weighted(self.change_weighed, d - self.ref_d, var)
        else:
            ch = self.changes.solve(d - self.ref_d, var)
        change, csd = ch.values, ch.sd
        if reference_mask is not None and np.any(reference_mask):
            change[reference_mask], csd[reference_mask] = 0.0, 0.0
        return change, csd

    def flag_support(self, d, rv, flag, most: int | None = None):
        """The one sensor each flag rests on, by case deletion: every flagged row of d (R, used)
        [K] (at most `most`, default SUPPORT_ROWS, evenly spread) is solved again with each
        reading left out in turn (rv ((used,) or (R, used)) [K^2], as changes_of).  Returns
        rows (k,), the rows examined, and lone (k, zones): the index among the used sensors
        without whose reading the other readings show no change of that zone (|change| / sd
        at most LONE_SCORE; the sensor that lowers it most), -1 where they do (a change seen
        mostly by one sensor, its neighbours moving a little, is the part's), where no answer
        is left without a sensor, or where the zone is not flagged."""
        rows = np.flatnonzero(np.asarray(flag).any(axis=1))
        most = SUPPORT_ROWS if most is None else most
        if rows.size > most:
            rows = rows[np.unique(np.linspace(0, rows.size - 1, most).round().astype(int))]
        k, n = rows.size, d.shape[1]
        lone = np.full((k, flag.shape[1]), -1)
        if not k:
            return rows, lone
        without = np.repeat(d[rows], n, axis=0)
        without[np.arange(k * n), np.tile(np.arange(n), k)] = np.nan
        change, csd = self.changes_of(without, np.repeat(rv[rows], n, axis=0) if np.ndim(rv) == 2 else rv)
        with np.errstate(invalid="ignore", divide="ignore"):
            score = (np.abs(change) / csd).reshape(k, n, -1)
        score = np.where(np.isfinite(score), score, np.inf)   # no answer without it: undecided
        weakest = np.argmin(score, axis=1)
        falls = np.take_along_axis(score, weakest[:, None, :], axis=1)[:, 0, :] <= LONE_SCORE
        lone[flag[rows] & falls] = weakest[flag[rows] & falls]
        return rows, lone


def change_priors(solver, ends_only: bool = False) -> list:
    """The change priors (edge setting, step factor) a trend weighs: every edge setting of the
    zones' steps (BatchSolver.step_edges; ends_only: the narrowest and the widest, as each
    row's own evidence averages over them) with every STEP_FACTORS value, or [(0, 1.0)]
    without steps."""
    edges = solver.step_edges
    chosen = sorted({0, edges - 1}) if ends_only else range(edges)
    return [(e, f) for e in chosen for f in STEP_FACTORS] if edges else [(0, 1.0)]


def _joint_change_prior(solver, priors, X, RV):
    """The change priors `priors` (change_priors) at the strength the joint evidence of the
    difference rows X (R, n) [K] with variances RV [K^2] prefers for the tied prior (factor 1,
    the first edge setting: the smooth change's own), each weighed by its joint evidence
    there (a uniform prior over them; parts of weight below CHANGE_PRIOR_CUT x the largest's
    left out): ([(change solver, log evidence)], (edge setting, step factor) of the heaviest,
    warnings)."""
    alpha, _, notes = solver.changes().joint_best(X, RV)
    parts = []
    for e, f in priors:
        c = solver.changes(alpha, step_factor=f, edge=e)
        le = float(c.joint_log_evidence(X, RV, [alpha])[0]) if len(priors) > 1 else 0.0
        parts.append((c, le, (e, f)))
    top = max(le for _, le, _ in parts)
    kept = [p for p in parts if p[1] >= top + math.log(CHANGE_PRIOR_CUT)]
    return [(c, le) for c, le, _ in kept], max(kept, key=lambda p: p[1])[2], notes


@dataclass
class SensorFault:
    """Running record of one sensor's rows set aside by RowChecks: how many, the first and
    last such row's start [s] and the largest |score| seen."""

    sensor: str
    rows: int = 0
    first_start_s: float | None = None
    last_start_s: float | None = None
    largest_score: float = 0.0


class RowChecks:
    """Each row's readings checked against the row's other sensors before it is inverted: a
    thermocouple that fails partway through a log (a jump, an open circuit) must not become a
    heater's change.  The check is on the change from the reference window (the change
    solver's leave-one-out score, BatchSolver.leave_one_out: offsets cancel, the noise is the
    random noise only), Bonferroni over `rows` x sensors at TREND_FAMILY_LEVEL family-wise.
    In a row the worst reading beyond the limit is set aside (left out of that row's absolute
    figures and changes alike) when the row's other readings show no change of their own
    (BatchSolver.departing_rows, Bonferroni over the rows: a heater change seen mostly by one
    thermocouple, its neighbours moving a little, is the part's, and stays), and the row is
    checked again, up to a quarter of its sensors;
    when several go together (diagnostics.model_suspect) the model is blamed, as `fit` does,
    and the row keeps them all.  The reference window itself is not checked (its fit screens
    its sensors)."""

    def __init__(self, names, rows: int, family_level: float = TREND_FAMILY_LEVEL):
        self.names = list(names)
        self.rows, self.family_level = max(int(rows), 1), float(family_level)
        self.comparisons = self.rows * max(len(self.names), 1)
        self.threshold = change_threshold(self.comparisons, family_level)
        self.faults = {n: SensorFault(n) for n in self.names}
        self.model_rows = 0           # rows where several sensors disagreed together (kept)

    def clean(self, changes, ref_d, ref_rv, start, d, rv, reference_mask=None) -> np.ndarray:
        """The rows d (R, n) [K] with the readings set aside as NaN (a copy), recorded; rv
        ((n,) or (R, n)) their random variances [K^2]; start (R,) [s]; changes: the change
        solver (BatchSolver.changes) and ref_d, ref_rv (n,) the reference window's readings
        and random variances (TrendModel.checked passes its own)."""
        d = np.asarray(d, float)
        out = d.copy()
        R, n = d.shape
        rv = np.asarray(rv, float)
        var = rv + np.asarray(ref_rv, float)          # (n,) for every row, or (R, n)
        todo = np.ones(R, bool) if reference_mask is None else ~np.asarray(reference_mask, bool)
        aside = np.zeros(d.shape, bool)
        scores = np.zeros(d.shape)
        for _ in range(max(1, n // 4)):
            rows = np.flatnonzero(todo)
            if not rows.size:
                break
            every = rows.size == R                     # the first pass: no copy of the rows
            z = changes.leave_one_out((out if every else out[rows]) - ref_d,
                                      var if var.ndim == 1 or every else var[rows])
            np.abs(z, out=z)
            z[np.isnan(z)] = -1.0
            worst = np.argmax(z, axis=1)
            score = z[np.arange(rows.size), worst]
            over = np.flatnonzero(score > self.threshold)
            hit, col = rows[over], worst[over]
            # a fault only where the row's other readings show no change of their own: a heater
            # change seen mostly by one sensor (its neighbours moving a little) is the part's
            without = out[hit] - ref_d
            without[np.arange(hit.size), col] = np.nan
            alone = ~changes.departing_rows(without, var[hit] if var.ndim == 2 else var,
                                            level=self.family_level / max(self.rows, 1))
            hit, col, sc = hit[alone], col[alone], score[over][alone]
            aside[hit, col] = True
            out[hit, col] = np.nan
            scores[hit, col] = sc
            todo[:] = False
            todo[hit] = True
        count = aside.sum(axis=1)
        together = np.zeros(R, bool)
        several = np.flatnonzero(count >= 2)            # model_suspect needs two at least
        together[several] = [model_suspect(int(k), n) for k in count[several]]
        if together.any():               # several at once: the model, not the sensors
            self.model_rows += int(together.sum())
            out[together], aside[together] = d[together], False
        start = np.asarray(start, float)
        for j in np.flatnonzero(aside.any(axis=0)):
            f, at = self.faults[self.names[j]], start[aside[:, j]]
            f.largest_score = max(f.largest_score, float(scores[aside[:, j], j].max()))
            f.rows += int(at.size)
            f.first_start_s = float(at.min()) if f.first_start_s is None else min(f.first_start_s, float(at.min()))
            f.last_start_s = float(at.max()) if f.last_start_s is None else max(f.last_start_s, float(at.max()))
        return out

    def found(self) -> list[SensorFault]:
        """The sensors set aside in at least one row."""
        return [f for f in self.faults.values() if f.rows]

    def warnings(self, when) -> list[str]:
        """One sentence per sensor set aside in some rows (when(seconds) -> text of a time)."""
        out = [f"sensor {f.sensor} disagreed with the other sensors in {f.rows} row(s) from {when(f.first_start_s)} "
               f"to {when(f.last_start_s)} (its change from the reference window up to {f.largest_score:.3g} of its "
               f"sd from what the others predict, limit {self.threshold:.2f}) and was left out of those rows: "
               f"a thermocouple failing or coming loose partway through the log; check it before reading a "
               f"zone's change there as the heater's" for f in self.found()]
        if self.model_rows:
            out.append(f"in {self.model_rows} row(s) several sensors disagreed with the others together; the "
                       f"model (a change sharper than the prior allows, or the part's conditions) is the likelier "
                       f"cause, so none was left out")
        return out


def band95(value, sd):
    """(lower, upper) of the 95 % normal band value +- Z95 sd."""
    return value - Z95 * sd, value + Z95 * sd


@dataclass
class ZoneFlags:
    """Running record of one zone's flags: rows flagged, the first flagged row (start, end
    [s], change and its sd) and the largest |change| / sd seen."""

    zone: str
    flagged_rows: int = 0
    first_flagged_start_s: float | None = None
    largest_change_in_sd: float = 0.0
    first_flagged_end_s: float | None = None
    change_at_first_flag: float | None = None
    change_sd_at_first_flag: float | None = None
    support_rows: int = 0                               # flagged rows examined for their support
    rests_on: dict = field(default_factory=dict)        # sensor -> rows whose flag rests on it alone

    def lone_sensor(self):
        """(sensor, rows) when one sensor alone carries at least half of the flagged rows
        examined, else None."""
        if not self.rests_on:
            return None
        name, rows = max(self.rests_on.items(), key=lambda kv: kv[1])
        return (name, rows) if 2 * rows >= self.support_rows else None


class ChangeFlags:
    """Flags of zone changes over a trend of `rows` rows (Bonferroni over rows x zones)."""

    def __init__(self, zone_names, rows: int, family_level: float = TREND_FAMILY_LEVEL):
        self.zone_names = list(zone_names)
        self.comparisons = max(int(rows) - 1, 1) * max(len(self.zone_names), 1)
        self.family_level = float(family_level)
        self.threshold = change_threshold(self.comparisons, self.family_level)
        self.zones = {z: ZoneFlags(z) for z in self.zone_names}

    def update(self, start, end, change, csd, reference_start: float) -> np.ndarray:
        """Flag rows (R, zones) whose |change| / sd exceeds the threshold, at or after the
        reference window's start; record them.  start, end (R,) [s]."""
        with np.errstate(invalid="ignore", divide="ignore"):
            score = np.abs(change) / csd
        flag = np.isfinite(score) & (score > self.threshold) & (np.asarray(start) >= reference_start)[:, None]
        for j, z in enumerate(self.zone_names):
            info, fz = self.zones[z], flag[:, j]
            if fz.any():
                first = int(np.argmax(fz))
                if info.first_flagged_start_s is None:
                    info.first_flagged_start_s, info.first_flagged_end_s = float(start[first]), float(end[first])
                    info.change_at_first_flag = float(change[first, j])
                    info.change_sd_at_first_flag = float(csd[first, j])
                info.flagged_rows += int(fz.sum())
            if np.any(np.isfinite(score[:, j])):
                info.largest_change_in_sd = max(info.largest_change_in_sd, float(np.nanmax(score[:, j])))
        return flag

    def note_support(self, flag, rows, lone, sensor_names) -> None:
        """Record flag_support's answer: flag (R, zones) this batch's flags, rows (k,) the rows
        examined, lone (k, zones) the index of the sensor each flag rests on (-1: none)."""
        examined = np.asarray(flag)[rows]
        for j, z in enumerate(self.zone_names):
            info = self.zones[z]
            info.support_rows += int(examined[:, j].sum())
            for i in lone[:, j][lone[:, j] >= 0]:
                info.rests_on[sensor_names[i]] = info.rests_on.get(sensor_names[i], 0) + 1

    def flagged(self) -> list[ZoneFlags]:
        """The zones flagged at least once."""
        return [f for f in self.zones.values() if f.flagged_rows]
