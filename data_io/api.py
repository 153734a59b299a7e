"""The library entry point: ``heatsight.fit("case.toml")`` reads the case and its readings
as the command line does and returns a `Fit`: the answers in user units for a notebook,
figures, and `write_report` writing the same files as ``heatsight fit --out``.

    import heatsight
    result = heatsight.fit("platen.toml")
    result                         # one line: face, quantity, mean +- 95 % band, power
    result.to_frame("zones")       # degC / K, or W/m^2 / kW/m^2 (data_io.display), mm, deg
    result.predict(pd.DataFrame({"r [mm]": [0, 50], "theta [deg]": [0, 90], "z [mm]": [20, 20]}))
    result.write_report("platen-fit")
    result.raw                     # the inverse layer's FitResult (SI)
"""

from __future__ import annotations

from html import escape
from pathlib import Path

import numpy as np
import pandas as pd


from .display import deg, display_for, file_display, mm, power_unit
from .errors import InputError
from .report_format import pm95_of, power_pm
from .units import column_unit, convert, split_header, ureg

#: units of the columns of a points table handed to `Fit.predict` when its header names none
POINT_UNITS = {"r": "mm", "theta": "deg", "z": "mm"}
_DIMENSIONS = {"r": "length", "theta": "angle", "z": "length"}
_TEMPERATURE = file_display("temperature")


def fit(case_path, *, readings=None, **options) -> "Fit":
    """Fit the case file `case_path`; `readings` overrides the case's snapshot file; the
    options are those of ``heatsight.inverse.fit`` (strength, smoothing, ...)."""
    import os

    from ..inverse.problem import fit_option_names
    from .fit_steps import fit_case, load_fit_case

    for name, value in (("case_path", case_path), ("readings", readings)):
        if not (isinstance(value, (str, os.PathLike)) or (name == "readings" and value is None)):
            raise InputError(f"heatsight.fit: {name} must be a path (str or pathlib.Path), got "
                             f"{type(value).__name__}")
    allowed = fit_option_names() + ["progress"]
    unknown = [k for k in options if k not in allowed]
    if unknown:
        raise InputError(f"heatsight.fit: unknown option {unknown[0]!r}; the options are {', '.join(allowed)}")
    case, readings_path = load_fit_case(case_path, readings, how_to_give="pass readings=")
    _check_overrides(case, options)
    result, _ = fit_case(case, readings_path, **options)
    return Fit(result, case, readings_path)


def _check_overrides(case, options) -> None:
    """The keyword options checked as the case file's are (values, then the sizes of
    limits.check_case and the draws' limit), before any work."""
    from dataclasses import replace

    from ..inverse.errors import InverseError
    from .limits import MAX_MONTE_CARLO, check_case, check_count

    given = {k: v for k, v in options.items() if k != "progress"}
    try:
        merged = case.fit.with_overrides(**given)
    except (InverseError, TypeError, ValueError) as exc:
        raise InputError(f"heatsight.fit: {exc}") from None
    check_case(replace(case, fit=merged))
    from ..inverse.calibration import calibration_refusal
    for face, what in merged.calibrate:
        refusal = calibration_refusal(case.faces, face, what)
        if refusal:
            raise InputError(f"heatsight.fit: calibrate: {refusal}")
    if merged.monte_carlo:
        check_count(int(merged.monte_carlo), MAX_MONTE_CARLO, "monte_carlo", "draws")


class Fit:
    """A fit of a case: the reconstructed face with its bands, zones and sensor health in
    user units.  `raw` is the inverse layer's FitResult (SI), `case` the case read."""

    def __init__(self, result, case, readings_path):
        self.raw = result
        self.case = case
        self.readings_path = Path(readings_path)

    # ------------------------------------------------------------------ short answers
    @property
    def face(self) -> str:
        return self.raw.face

    @property
    def quantity(self) -> str:
        return self.raw.quantity

    @property
    def warnings(self) -> list:
        return list(self.raw.warnings)

    def _headline(self) -> list[tuple[str, str]]:
        s, d = self.raw.summary, display_for(self.raw)
        mean, sd = s["mean"], s["mean_sd"]
        rows = [("face", f"{self.face} ({self.quantity.replace('_', ' ')})"),
                ("mean", pm95_of(d.value(mean), d.diff(sd), d.symbol)),
                ("power in", power_pm(s["total_power_W"], s["total_power_sd_W"], power_unit(self.raw.cylinder)))]
        rows.append(("set aside", ", ".join(s["set_aside"]) or "none"))
        return rows

    def __repr__(self) -> str:
        text = "; ".join(f"{k} {v}" for k, v in self._headline())
        return f"<heatsight Fit of {self.case.path.name}: {text}>"

    def _repr_html_(self) -> str:
        rows = "".join(f"<tr><th style=\"text-align:left\">{escape(k)}</th><td>{escape(v)}</td></tr>"
                       for k, v in self._headline())
        zones = self.to_frame("zones")
        table = f"<table>{rows}</table>"
        if len(zones):
            table += zones.to_html(index=False, float_format=lambda x: f"{x:.4g}")
        return f"<div><strong>heatsight fit of {escape(self.case.path.name)}</strong>{table}</div>"

    def summary(self) -> str:
        """The short text the command line prints (without the output folder)."""
        from .fit_outputs import summary_lines

        return "\n".join(summary_lines(self.raw))

    # ------------------------------------------------------------------ tables
    def to_frame(self, which: str = "face") -> pd.DataFrame:
        """A table in user units, the unit in each column name: "face" (the estimate on the
        display grid with sd and 95 % band), "zones" or "sensors" (readings, fit, residuals,
        leave-one-out predictions, flags)."""
        if which == "face":
            return self._face_frame()
        if which == "zones":
            return self._zones_frame()
        if which == "sensors":
            return self._sensors_frame()
        raise InputError(f"to_frame: which must be 'face', 'zones' or 'sensors', got {which!r}")

    def _face_frame(self) -> pd.DataFrame:
        g, d = self.raw.grid, display_for(self.raw)
        u, du = f"[{d.unit}]", f"[{d.diff_unit}]"
        return pd.DataFrame({
            "r [mm]": mm(g["r_m"].to_numpy()), "theta [deg]": deg(g["theta_rad"].to_numpy()),
            "z [mm]": mm(g["z_m"].to_numpy()), f"estimate {u}": d.value(g["estimate"].to_numpy()),
            f"sd {du}": d.diff(g["std"].to_numpy()), f"lower {u}": d.value(g["lower"].to_numpy()),
            f"upper {u}": d.value(g["upper"].to_numpy())})

    def _zones_frame(self) -> pd.DataFrame:
        d = display_for(self.raw)
        u, du = f"[{d.unit}]", f"[{d.diff_unit}]"
        rows = []
        for z in self.raw.summary["zones"]:
            row = {"zone": z["name"], f"mean {u}": d.value(z["mean"]), f"sd {du}": d.diff(z["sd"]),
                   f"lower {u}": d.value(z["lower"]), f"upper {u}": d.value(z["upper"]),
                   f"deviation from face mean {du}": d.diff(z["deviation_from_face_mean"]),
                   "area [mm^2]": float(from_m2(z["area_m2"]))}
            pu = power_unit(self.raw.cylinder)
            area = "area [mm^2]" if pu == "W" else "area [mm^2/m]"    # per metre on a long part
            row[area] = row.pop("area [mm^2]")
            if "power_W" in z:
                row.update({f"power [{pu}]": z["power_W"], f"power sd [{pu}]": z["power_sd_W"]})
            rows.append(row)
        pu = power_unit(self.raw.cylinder)
        columns = ["zone", f"mean {u}", f"sd {du}", f"lower {u}", f"upper {u}", f"deviation from face mean {du}",
                   "area [mm^2]" if pu == "W" else "area [mm^2/m]"] + (
            [f"power [{pu}]", f"power sd [{pu}]"] if self.quantity == "heat_flux" else [])
        return pd.DataFrame(rows, columns=columns)

    def _sensors_frame(self) -> pd.DataFrame:
        s = self.raw.sensors
        t = _TEMPERATURE.value
        return pd.DataFrame({
            "sensor": s["sensor"].astype(str).to_numpy(),
            "r [mm]": mm(s["r_m"].to_numpy(float)), "theta [deg]": deg(s["theta_rad"].to_numpy(float)),
            "z [mm]": mm(s["z_m"].to_numpy(float)),
            "measured [degC]": t(s["measured"].to_numpy(float)), "fitted [degC]": t(s["fitted"].to_numpy(float)),
            "residual [K]": s["residual"].to_numpy(float), "standardized": s["standardized"].to_numpy(float),
            "loo predicted [degC]": t(s["loo_predicted"].to_numpy(float)), "loo sd [K]": s["loo_sd"].to_numpy(float),
            "standardized loo": s["standardized_loo"].to_numpy(float),
            "score": (s["score"] if "score" in s else s["standardized_loo"]).to_numpy(float),
            "caught offset [K]": s["caught_offset"].to_numpy(float),
            "fault probability": (s["fault_probability"] if "fault_probability" in s
                                  else pd.Series(np.nan, index=s.index)).to_numpy(float),
            "flag": s["flag"].astype(str).to_numpy()})

    # ------------------------------------------------------------------ anywhere in the part
    def predict(self, points, theta=None, z=None, *, return_std: bool = True):
        """Temperature [degC] (and its sd [K] when return_std) at points inside the part.

        points: a DataFrame with columns r, theta, z (units in brackets, e.g. ``r [mm]``;
        without brackets mm and deg), or arrays r [mm], theta [deg], z [mm] given as
        predict(r, theta, z), or an (N, 3) array of such rows."""
        try:
            r_m, th, z_m = self._points_si(points, theta, z)
        except InputError:
            raise
        except (TypeError, ValueError) as exc:
            raise InputError(f"predict: points must be numbers (a DataFrame with columns r, theta, z, three "
                             f"arrays or an (N, 3) array): {' '.join(str(exc).split())}") from None
        if not (r_m.shape == th.shape == z_m.shape):
            raise InputError(f"predict: r, theta and z need the same length, got {r_m.size}, {th.size}, {z_m.size}")
        if not (np.all(np.isfinite(r_m)) and np.all(np.isfinite(th)) and np.all(np.isfinite(z_m))):
            raise InputError("predict: every coordinate must be a finite number")
        cyl = self.raw.cylinder
        inside = cyl.contains(r_m, z_m) & (r_m >= 0)
        if not np.all(inside):
            i = int(np.flatnonzero(~inside)[0])
            bore = f"inner radius {mm(cyl.inner_radius):.6g} mm, " if cyl.hollow else ""
            height = "long" if getattr(cyl, "long", False) else f"{mm(cyl.height):.6g} mm"
            raise InputError(f"point {i + 1} (r = {mm(r_m[i]):.6g} mm, z = {mm(z_m[i]):.6g} mm) lies outside "
                             f"the part ({bore}radius {mm(cyl.radius):.6g} mm, height {height})")
        mean, sd, _, _ = self.raw.predict(r_m, th, z_m)
        out = _TEMPERATURE.value(mean)
        return (out, _TEMPERATURE.diff(sd)) if return_std else out

    @staticmethod
    def _points_si(points, theta, z):
        if isinstance(points, pd.DataFrame):
            cols = {}
            for header in points.columns:
                name, unit = split_header(str(header))
                key = name.strip().lower()
                if key in POINT_UNITS:
                    # the header's unit checked as a CSV header's is (one message naming it)
                    column_unit(unit, _DIMENSIONS[key], f"column '{header}'")
                    if unit is None and key in ("r", "z"):
                        # a table written for the command line (m there) would be 1000x off
                        import warnings

                        from .tables import unitless_length
                        warnings.warn(unitless_length(header, key, POINT_UNITS[key]), UserWarning, stacklevel=3)
                    cols[key] = convert(points[header].to_numpy(float), unit or POINT_UNITS[key], _DIMENSIONS[key])
            missing = [k for k in POINT_UNITS if k not in cols]
            if missing:
                raise InputError(f"the points table needs the columns r, theta, z; missing {', '.join(missing)} "
                                 f"(found: {', '.join(map(str, points.columns))})")
            return tuple(np.atleast_1d(np.asarray(cols[k], float)) for k in POINT_UNITS)
        if theta is None and z is None:
            a = np.atleast_2d(np.asarray(points, float))
            if a.ndim != 2 or a.shape[1] != 3:
                raise InputError(f"points must be a DataFrame, three arrays r, theta, z, or an (N, 3) array; "
                                 f"got shape {a.shape}")
            r, theta, z = a[:, 0], a[:, 1], a[:, 2]
        else:
            r = points
        return tuple(np.atleast_1d(convert(np.asarray(x, float), POINT_UNITS[k], _DIMENSIONS[k]))
                     for k, x in zip(POINT_UNITS, (r, theta, z)))

    # ------------------------------------------------------------------ figures and files
    def plot_face(self):
        """Map of the estimated face with the case's zones outlined (matplotlib Figure)."""
        from .plots import face_map

        return face_map(self.raw, zones=getattr(self.case, "zones", None) or ())

    def plot_sensors(self):
        """Sensor health: residuals and leave-one-out scores (matplotlib Figure)."""
        from .plots import sensor_health

        return sensor_health(self.raw)

    def plan(self, add: int = 4, *, candidates=None, targets=None) -> "Plan":
        """Where `add` new thermocouples most reduce the targets' sd, from this fit's posterior
        (see ``heatsight.plan``)."""
        from .plan_command import compute_plan

        return Plan(compute_plan(self.case, add, candidates, targets, self.readings_path, fit=self.raw))

    def write_report(self, folder, *, at=None, overwrite: bool = False) -> Path:
        """Write the files of ``heatsight fit --out folder`` (estimate.csv, sensors.csv,
        summary.json, figures, report.html; points.csv for the query points table `at`)
        through the command's own code; returns the folder."""
        import os

        from .csv_out import API_WORDS, output_folder
        from .fit_steps import output_files, write_outputs
        from .tables import read_points

        if not isinstance(folder, (str, os.PathLike)):
            raise InputError(f"write_report: folder must be a path (str or pathlib.Path), got {type(folder).__name__}")
        if at is not None and not isinstance(at, (str, os.PathLike)):
            raise InputError(f"write_report: at must be the path of a CSV file of points (r, theta, z), got "
                             f"{type(at).__name__}; predict() takes a table of points")
        folder, create = output_folder(Path(folder), self.case, overwrite, inputs=[self.readings_path, at],
                                       words=API_WORDS)
        points = read_points(at, self.case.cylinder) if at else None
        write_outputs(folder, create, output_files(self.raw, self.case, self.readings_path, points))
        return folder


def plan(case_path, add: int = 4, *, candidates=None, targets=None, readings=None) -> "Plan":
    """Plan `add` new thermocouples for the case file `case_path` as ``heatsight plan`` does:
    candidates a CSV of drillable positions (default: the [plan] rules' grid), targets a list of
    "zones" | "power" | "mean" | "face" | zone names, readings a snapshot (default: the case's)."""
    from .case import load_case
    from .limits import check_case
    from .plan_command import compute_plan

    case = load_case(case_path)
    check_case(case)
    return Plan(compute_plan(case, add, candidates, targets, readings))


class Plan:
    """A layout plan in user units: `picks` (plan.csv: the current layout, then each new
    sensor in order with the targets' sds after it), `sensors_value` (sensors_value.csv),
    `summary()` (the console line), `write(folder)` (every output of ``heatsight plan``);
    `raw`: the data_io.plan_command.PlanRun (SI)."""

    def __init__(self, run):
        self.raw = run

    @property
    def picks(self) -> pd.DataFrame:
        from .plan_outputs import picks_frame
        return picks_frame(self.raw)

    @property
    def sensors_value(self) -> pd.DataFrame:
        from .plan_outputs import value_frame
        return value_frame(self.raw)

    def summary(self) -> str:
        from .plan_outputs import console_line
        return console_line(self.raw)

    def __repr__(self) -> str:
        return f"<heatsight Plan of {self.raw.case.path.name}: {self.summary()}>"

    def write(self, folder, *, overwrite: bool = False) -> Path:
        from .csv_out import API_WORDS, output_folder
        from .fit_steps import write_outputs
        from .plan_outputs import PLAN_OUTPUT_NAMES, output_files

        folder, create = output_folder(Path(folder), self.raw.case, overwrite, names=PLAN_OUTPUT_NAMES,
                                       inputs=[self.raw.readings_path, self.raw.candidates_path], words=API_WORDS)
        write_outputs(folder, create, output_files(self.raw)[0])
        return folder


def from_m2(area):
    """Areas [m^2] -> mm^2 (pint)."""
    return ureg.Quantity(np.asarray(area, float), "m^2").to("mm^2").magnitude
