"""Which sensors inverse.fit keeps: each model's screening (diagnostics.screen_outliers with
the strength), the zone model's settled against its levels' prior."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .diagnostics import screen_outliers, sensor_table, unchecked_warnings
from .linear_gaussian import LinearGaussianProblem
from .strength import choose_strength


@dataclass
class Screening:
    choice: object
    problem: LinearGaussianProblem
    kept: np.ndarray
    table: object
    set_aside: list
    warnings: list


def protected(rd, opts) -> list[int]:
    """Indices of the readings the screening never sets aside (FitOptions.keep_sensors)."""
    keep = set(opts.keep_sensors)
    return [i for i, name in enumerate(rd.names) if name in keep]


def screen_sensors(problem, rd, opts, gross=(), spare=()) -> Screening:
    """Screen the sensors (unless keep_all_sensors) and choose the strength: gross faults
    found first stay set aside; several sensors failing together blame the model
    (diagnostics.screen_outliers, model_first); `spare`: indices of readings another model
    explains, never set aside here (the model is then the likelier culprit)."""
    request = opts.strength_request
    if opts.keep_all_sensors:
        choice = choose_strength(problem, request)
        table = sensor_table(problem, choice.alpha, names=rd.names, threshold=opts.threshold)
        return Screening(choice, problem, np.ones(rd.n, dtype=bool), table, [],
                       list(choice.warnings) + unchecked_warnings(table))
    s = screen_outliers(problem, strength=request, threshold=opts.threshold, names=rd.names,
                        preset=list(gross), model_first=True, protect=protected(rd, opts), spare=spare)
    warnings = list(s.warnings) + [f"sensor {x.sensor} set aside: {x.reason}" for x in s.set_aside]
    return Screening(s.strength, s.problem, s.kept, s.table, list(s.set_aside),
                   warnings + list(s.strength.warnings) + unchecked_warnings(s.table))


def settled_screen(zone_model, rd, opts, gross, leading, rounds=3, spare=()):
    """The zone model's own screening, its levels' prior chosen (ZoneModel.choose_level_scale,
    when `leading` is given: the smooth model's leading hyperparameters) on the sensors that
    screening keeps: chosen, screened again, until the kept sensors stop changing; after
    `rounds` screenings that still move (a sensor at the threshold, in and out with the
    choice) it is chosen once more on the last screening's sensors and the screening at that
    choice is returned.  The answer's prior is chosen once more at the learned remainder's
    own point (ZoneModel.learned_fit) without screening again: on the tube bore (seed 2) the
    choice there gave the cool streak's level an sd of 44 K, which explained the broken
    TC07's +6 K away, and screening again at it kept the sensor (zone 4.3 sd off).
    spare: the readings the smooth model finds unremarkable (fitting.unremarkable), never set
    aside here (screen_sensors)."""
    screen = screen_sensors(zone_model.marginal, rd, opts, gross, spare)
    if leading is None:
        return screen
    for _ in range(rounds):
        kept = screen.kept
        zone_model.choose_level_scale(kept, leading)
        screen = screen_sensors(zone_model.marginal, rd, opts, gross, spare)
        if np.array_equal(screen.kept, kept):
            return screen
    zone_model.choose_level_scale(screen.kept, leading)
    return screen_sensors(zone_model.marginal, rd, opts, gross, spare)
