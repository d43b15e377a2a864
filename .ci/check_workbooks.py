"""Independent check of dampfront's result and errors workbooks with openpyxl.

Reads every *.result.xlsx and *.errors.xlsx below the folder given and checks the sheets, keys
and headers of the workbook format, and that every numeric place holds a number cell (never
text, NaN or infinity). Exits 1 if anything fails, listing every failure."""
import math
import pathlib
import sys

import openpyxl

SUMMARY_KEYS = [
    "title", "status", "drying_time_h", "final_hours", "final_mean_moisture_pct",
    "final_surface_moisture_pct", "final_centre_moisture_pct",
    "max_surface_centre_difference_pct", "final_surface_temp_c", "final_centre_temp_c",
    "water_removed_kg_m2", "mass_balance_error", "cells", "time_steps", "solve_seconds",
    "program_version", "input_sha256",
    # format 1.1
    "target_moisture_pct", "drying_time_days", "time_of_max_difference_h",
    "final_surface_water_activity", "final_centre_water_activity", "evaporation_energy_kj_m2",
]
SUMMARY_HEADER = ["key", "value", "unit"]
UNITS = {
    "drying_time_h": "h", "final_hours": "h", "final_mean_moisture_pct": "%",
    "final_surface_moisture_pct": "%", "final_centre_moisture_pct": "%",
    "max_surface_centre_difference_pct": "%", "final_surface_temp_c": "°C",
    "final_centre_temp_c": "°C", "water_removed_kg_m2": "kg/m²", "target_moisture_pct": "%",
    "drying_time_days": "d", "time_of_max_difference_h": "h", "evaporation_energy_kj_m2": "kJ/m²",
}
COUNT_KEYS = {"cells", "time_steps"}
TEXT_KEYS = {"title", "status", "program_version", "input_sha256"}
CURVE_HEADERS = [
    "hours", "mean_moisture_pct", "surface_moisture_pct", "centre_moisture_pct",
    "moisture_ratio", "mean_temp_c", "surface_temp_c", "centre_temp_c", "drying_rate_pct_h",
    "air_temp_c", "air_rh_pct", "step",
]
CURVE_ADDITIONS = [
    "equilibrium_moisture_pct", "surface_water_activity", "centre_water_activity",
    "surface_centre_difference_pct",
]
STEPS_HEADERS = [
    "step", "start_h", "end_h", "hours", "ended_by", "mean_moisture_at_end_pct",
    "max_surface_centre_difference_pct", "dry_bulb_c", "rh_pct",
]
ENDED_BY = {"time", "moisture", "target", "end", "skipped"}
VARIANT_HEADERS = [
    "variant", "overrides", "status", "drying_time_h", "final_mean_moisture_pct",
    "max_surface_centre_difference_pct", "final_surface_temp_c", "final_centre_temp_c",
]
VARIANT_STATUS = {"ok", "target_not_reached", "input_error", "solver_error"}


def is_number(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def sheet(wb, name):
    for n in wb.sheetnames:
        if n.strip().lower() == name:
            return wb[n]
    return None


def check_result(path, fail):
    wb = openpyxl.load_workbook(path, data_only=True)
    for required in ("summary", "curves", "steps", "profiles", "input"):
        if sheet(wb, required) is None:
            fail(f"{path}: no sheet {required}")
            return
    rows = [r for r in sheet(wb, "summary").iter_rows(values_only=True) if r and r[0] is not None]
    if [str(v).lower() for v in rows[0][:3]] != SUMMARY_HEADER:
        fail(f"{path}: summary header row {rows[0][:3]}")
        return
    rows = rows[1:]
    keys = [str(r[0]) for r in rows]
    if keys[: len(SUMMARY_KEYS)] != SUMMARY_KEYS:
        fail(f"{path}: summary keys {keys[:len(SUMMARY_KEYS)]} are not the contract's")
        return
    for r in rows[: len(SUMMARY_KEYS)]:
        key, value = str(r[0]), (r[1] if len(r) > 1 else None)
        if key in TEXT_KEYS:
            if not isinstance(value, str):
                fail(f"{path}: summary {key} should be text, found {value!r}")
        elif value is not None and not is_number(value):
            fail(f"{path}: summary {key} should be a number or empty, found {value!r}")
        elif key in COUNT_KEYS and value != int(value):
            fail(f"{path}: summary {key} should be a whole number, found {value!r}")
        unit = r[2] if len(r) > 2 else None
        if key in UNITS and unit != UNITS[key]:
            fail(f"{path}: summary {key} unit {unit!r}, expected {UNITS[key]!r}")
    if rows[1][1] not in ("ok", "target_not_reached"):
        fail(f"{path}: status {rows[1][1]!r}")
    if not any(str(r[0]) == "caution" for r in rows):
        fail(f"{path}: summary has no caution rows")

    curves = sheet(wb, "curves")
    header = [c.value for c in next(curves.iter_rows(max_row=1))]
    if header[:12] != CURVE_HEADERS:
        fail(f"{path}: curves header {header[:12]}")
    layer_cols = []
    for h in header[12:]:
        if h is None or not str(h).startswith("layer_"):
            break
        layer_cols.append(h)
    if not layer_cols or any(
        h != f"layer_{i + 1}_mean_moisture_pct" for i, h in enumerate(layer_cols)
    ):
        fail(f"{path}: curves layer columns {layer_cols}")
    width = 12 + len(layer_cols)
    if header[width:width + len(CURVE_ADDITIONS)] != CURVE_ADDITIONS:
        fail(f"{path}: curves 1.1 columns {header[width:width + len(CURVE_ADDITIONS)]}")
    width += len(CURVE_ADDITIONS)
    for n, row in enumerate(curves.iter_rows(min_row=2, max_col=width, values_only=True)):
        for i, v in enumerate(row):
            if i == 11 or v is None:
                continue
            if not is_number(v):
                fail(f"{path}: curves column {header[i]} holds {v!r}")
        if n == 0 and row[0] != 0:
            fail(f"{path}: the first curves row is at {row[0]} h, not 0")

    steps = sheet(wb, "steps")
    sheader = [c.value for c in next(steps.iter_rows(max_row=1))]
    if sheader[: len(STEPS_HEADERS)] != STEPS_HEADERS:
        fail(f"{path}: steps header {sheader}")
    srows = list(steps.iter_rows(min_row=2, max_col=len(STEPS_HEADERS), values_only=True))
    if not srows:
        fail(f"{path}: steps sheet has no step")
    for row in srows:
        if not isinstance(row[0], str) or row[4] not in ENDED_BY:
            fail(f"{path}: steps row {row}")
        for i in (1, 2, 3, 5, 6, 7, 8):
            if row[i] is not None and not is_number(row[i]):
                fail(f"{path}: steps column {STEPS_HEADERS[i]} holds {row[i]!r}")

    variants = sheet(wb, "variants")
    if variants is not None:
        vheader = [c.value for c in next(variants.iter_rows(max_row=1))]
        if vheader[: len(VARIANT_HEADERS)] != VARIANT_HEADERS:
            fail(f"{path}: variants header {vheader}")
        for row in variants.iter_rows(min_row=2, max_col=len(VARIANT_HEADERS), values_only=True):
            if row[0] is None:
                continue
            if row[2] not in VARIANT_STATUS:
                fail(f"{path}: variants row {row}")
            for i in range(3, len(VARIANT_HEADERS)):
                if row[i] is not None and not is_number(row[i]):
                    fail(f"{path}: variants column {VARIANT_HEADERS[i]} holds {row[i]!r}")

    profiles = sheet(wb, "profiles")
    pheader = [c.value for c in next(profiles.iter_rows(max_row=1))]
    pheader = pheader[: pheader.index(None)] if None in pheader else pheader
    if pheader[0] != "position_mm" or not all(
        str(h).startswith(("moisture_pct_at_", "temp_c_at_")) and str(h).endswith("h")
        for h in pheader[1:]
    ):
        fail(f"{path}: profiles header {pheader}")
    for row in profiles.iter_rows(min_row=2, max_col=len(pheader), values_only=True):
        for i, v in enumerate(row):
            if v is not None and not is_number(v):
                fail(f"{path}: profiles column {pheader[i]} holds {v!r}")

    check = sheet(wb, "check")
    if check is not None:
        for row in check.iter_rows(min_row=2, max_col=4, values_only=True):
            for v in row:
                if v is not None and not is_number(v):
                    fail(f"{path}: check table holds {v!r}")


def check_errors(path, fail):
    wb = openpyxl.load_workbook(path, data_only=True)
    ws = sheet(wb, "problems")
    if ws is None:
        fail(f"{path}: no sheet problems")
        return
    rows = list(ws.iter_rows(values_only=True))
    if [str(v).lower() for v in rows[0][:3]] != ["sheet", "cell", "problem"]:
        fail(f"{path}: problems header {rows[0]}")
    if len(rows) < 2:
        fail(f"{path}: no problem listed")


def main():
    root = pathlib.Path(sys.argv[1])
    failures = []
    results = sorted(root.rglob("*.result.xlsx"))
    errors = sorted(root.rglob("*.errors.xlsx"))
    for p in results:
        check_result(p, failures.append)
    for p in errors:
        check_errors(p, failures.append)
    if not results:
        failures.append(f"no result workbook found under {root}")
    for f in failures:
        print("FAIL", f)
    print(f"openpyxl: {len(results)} result and {len(errors)} errors workbooks read, "
          f"{len(failures)} failure(s)")
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
