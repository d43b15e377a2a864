"""A side-by-side peer for dampfront's solver: scipy's BDF method of lines on the same mesh.

For the bench problems P1-P4 (issue 8; defined in benches/common/mod.rs) this script solves the
same cell-centred finite-volume discretisation as dampfront (dampfront's own faces and cell
centres, which it hands over, face areas, cell volumes, D at the face from the mean of its two
cells, the exposed face's surface balance with dampfront's second-order surface gradient:
conduction from X* = w1 X_1 + w2 X_2 over the distance h1 h2 / (h1 + h2)) with scipy's
``solve_ivp(method="BDF")`` and a sparse (tridiagonal) Jacobian pattern (``jac_sparsity``),
timed around the solve only. It measures the error in the mean moisture ratio against the same
exact values as dampfront's bench (Crank's series for P1, P2 and P4, a very fine dampfront run
for P3), finds for each side the cheapest setting (cells and tolerance) that reaches 1e-4 and
1e-5, and prints the ratio of the solve times. dampfront's side comes from the same run: the
script starts ``cargo bench --bench solver -- --peer-json``, which times dampfront's solve over
a grid of settings and hands over its meshes (faces and centres).

It then compares whole runs for P3: this script's own run for P3 alone (Python start, imports,
reading the mesh, the solve, writing the curve as CSV) against ``dampfront solve`` on a P3
workbook (start, reading the xlsx, the solve, writing the result workbook with its charts).

Install its two packages yourself (CI does not run this script):

    pip install numpy scipy

and run it from the repository root:

    python3 benches/python_peer.py

It takes a few minutes on two cores.
"""

import json
import os
import pathlib
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np
import scipy
from scipy.integrate import solve_ivp
from scipy.sparse import diags

ROOT = pathlib.Path(__file__).resolve().parent.parent
TARGETS = [1e-4, 1e-5]
# Quarter-decade steps, as dampfront's side (benches/solver.rs, peer_json).
RTOLS = [10.0 ** (-3.0 - k / 4.0) for k in range(21)]


class Discretisation:
    """dampfront's finite-volume mesh and fluxes for one problem at one cell count."""

    def __init__(self, p, centres, faces):
        c = np.asarray(centres, dtype=float)
        faces = np.asarray(faces, dtype=float)
        n = len(c)
        length = p["length"]
        m = p["geometry_m"]
        # dampfront's own faces and centres: a cylinder's or sphere's centre is its cell's volume
        # centroid, not the faces' mid-point, so neither follows from the other.
        if len(faces) != n + 1:
            raise ValueError(f"{n} centres need {n + 1} faces, not {len(faces)}")
        r = np.maximum(length - faces, 0.0)  # radius; face A is the outer surface
        if m == 0:
            areas = np.ones(n + 1)
            volumes = np.diff(faces)
        else:
            areas = (r / length) ** m
            volumes = (r[:-1] ** (m + 1) - r[1:] ** (m + 1)) / ((m + 1) * length**m)
        self.n = n
        self.areas = areas
        self.volumes = volumes
        self.distance = np.diff(c)  # between neighbouring centres
        # The exposed face's second-order gradient (dampfront's solver::problem::SurfaceGradient):
        # the parabola through the surface value and the first two centres, h1 < h2 from the face.
        h1, h2 = c[0] - faces[0], c[1] - faces[0]
        span = h2 * h2 - h1 * h1
        self.weights = (h2 * h2 / span, -h1 * h1 / span)
        self.half = h1 * h2 / (h1 + h2)
        self.d_ref = p["d_ref"]
        self.b = p["moisture_coef"]
        self.x_eq = p["x_eq"]
        self.beta = p["beta"]
        self.fixed = p["surface"] == "fixed"
        self.x0 = p["x0"]
        self.total = volumes.sum()

    def d(self, x):
        return self.d_ref * np.exp(self.b * x)

    def extrapolated(self, x):
        """X* = w1 X_1 + w2 X_2, its correction limited to half the cell value as dampfront's."""
        correction = self.weights[1] * (x[1] - x[0])
        limit = 0.5 * abs(x[0])
        if abs(correction) > limit:
            correction = np.copysign(limit, correction)
        return x[0] + correction

    def surface_outflow(self, xc):
        """Outflow through face A per unit density from the extrapolated value `xc`: conduction
        over `half`, balanced against the surface law (Newton on the scalar balance for a
        moisture-dependent D)."""
        if self.fixed:
            xs = self.x_eq
        else:
            g = 1.0 / self.half
            if self.b == 0.0:
                k = self.d_ref * g
                xs = (k * xc + self.beta * self.x_eq) / (k + self.beta)
            else:
                xs = xc
                for _ in range(50):
                    xm = 0.5 * (xc + xs)
                    dm = self.d_ref * np.exp(self.b * xm)
                    h = g * dm * (xc - xs) - self.beta * (xs - self.x_eq)
                    dh = g * (0.5 * self.b * dm * (xc - xs) - dm) - self.beta
                    step = h / dh
                    xs -= step
                    if abs(step) <= 1e-15 * (1.0 + abs(xs)):
                        break
        xm = 0.5 * (xc + xs)
        return self.d(xm) * (xc - xs) / self.half

    def rhs(self, _t, x):
        flux = np.zeros(self.n + 1)  # towards +s at each face, per unit density
        xm = 0.5 * (x[:-1] + x[1:])
        flux[1:-1] = self.d(xm) * (x[:-1] - x[1:]) / self.distance
        flux[0] = -self.surface_outflow(self.extrapolated(x))
        a = self.areas * flux
        return (a[:-1] - a[1:]) / self.volumes

    def ratio(self, xs):
        mean = (self.volumes[:, None] * xs).sum(axis=0) / self.total
        return (mean - self.x_eq) / (self.x0 - self.x_eq)


def scipy_solve_once(p, cells, rtol):
    """One BDF solve on dampfront's mesh with `cells` cells: (discretisation, solution).
    Only the solve_ivp call is inside the timing of `scipy_solve`; the mesh and the sparsity
    pattern are set up before it."""
    disc = Discretisation(p, p["centres"][str(cells)], p["faces"][str(cells)])
    times = np.asarray(p["times"])
    sparsity = diags([1.0, 1.0, 1.0], [-1, 0, 1], shape=(disc.n, disc.n))
    y0 = np.full(disc.n, disc.x0)
    start = time.perf_counter()
    sol = solve_ivp(
        disc.rhs,
        (0.0, times[-1]),
        y0,
        method="BDF",
        t_eval=times,
        rtol=rtol,
        atol=rtol * 0.1,
        jac_sparsity=sparsity,
    )
    return disc, sol, time.perf_counter() - start


def scipy_solve(p, cells, rtol):
    """The fastest of up to five BDF solves (at least two, while under 0.3 s in all):
    (seconds around solve_ivp, error in MR at the exact times)."""
    exact = np.asarray(p["exact_mr"])
    best = float("inf")
    budget = time.perf_counter() + 0.3
    for attempt in range(5):
        disc, sol, elapsed = scipy_solve_once(p, cells, rtol)
        best = min(best, elapsed)
        if attempt >= 1 and time.perf_counter() > budget:
            break
    if not sol.success:
        return best, float("inf")
    return best, float(np.max(np.abs(disc.ratio(sol.y) - exact)))


def ratio(r):
    return f"{r:.1f}x" if r < 10 else f"{r:.0f}x"


def cheapest(entries, target):
    ok = [e for e in entries if e["error"] <= target]
    return min(ok, key=lambda e: e["solve_s"]) if ok else None


def dampfront_data(work):
    data = work / "peer.json"
    book = work / "p3.xlsx"
    cmd = [
        "cargo", "bench", "--bench", "solver", "--",
        "--peer-json", str(data), "--p3-workbook", str(book),
    ]
    subprocess.run(cmd, cwd=ROOT, check=True)
    return json.loads(data.read_text()), book


def scipy_grid(p):
    """scipy over cells x rtol; per cell count from loose to tight until 1e-5 is met."""
    entries = []
    for cells in sorted(int(c) for c in p["centres"]):
        for rtol in RTOLS:
            secs, err = scipy_solve(p, cells, rtol)
            entries.append({"cells": cells, "tol": rtol, "solve_s": secs, "error": err})
            if err <= TARGETS[-1]:
                break
    return entries


def p3_alone(data_path, cells, rtol, out_csv):
    """The whole run for P3 as a user of scipy would make it (the command `--p3-alone`)."""
    p = json.loads(pathlib.Path(data_path).read_text())["P3"]
    disc, sol, _ = scipy_solve_once(p, int(cells), float(rtol))
    mr = disc.ratio(sol.y)
    with open(out_csv, "w") as f:
        f.write("hours,mean_moisture_pct,moisture_ratio\n")
        for t, r in zip(sol.t, mr):
            mean = p["x_eq"] + r * (p["x0"] - p["x_eq"])
            f.write(f"{t / 3600.0},{100.0 * mean},{r}\n")


def median_wall(cmd, runs=7, cwd=None):
    walls = []
    for _ in range(runs):
        start = time.perf_counter()
        subprocess.run(
            cmd, check=True, cwd=cwd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
        )
        walls.append(time.perf_counter() - start)
    return statistics.median(walls)


def main():
    if len(sys.argv) == 6 and sys.argv[1] == "--p3-alone":
        p3_alone(*sys.argv[2:])
        return
    work = pathlib.Path(tempfile.mkdtemp(prefix="dampfront-peer-"))
    data, book = dampfront_data(work)
    print()
    print(
        f"python peer: numpy {np.__version__}, scipy {scipy.__version__}, "
        f"Python {sys.version.split()[0]}, {os.cpu_count()} cores; solve_ivp BDF with "
        "jac_sparsity on dampfront's mesh; solve only, fastest of repeats"
    )
    print(
        "| problem | target | scipy cells | rtol | scipy ms | scipy error "
        "| dampfront cells | tol | dampfront ms | dampfront error | ratio |"
    )
    print("|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    chosen = {}
    for name in ["P1", "P2", "P3", "P4"]:
        p = data[name]
        peer = scipy_grid(p)
        for target in TARGETS:
            s = cheapest(peer, target)
            d = cheapest(p["dampfront"], target)
            if name == "P3" and target == TARGETS[0]:
                chosen = {"scipy": s, "dampfront": d}
            if s is None or d is None:
                print(f"| {name} | {target:.0e} | (not reached in the grid: scipy {s}, dampfront {d}) |")
                continue
            print(
                f"| {name} | {target:.0e} | {s['cells']} | {s['tol']:.1e} | "
                f"{s['solve_s'] * 1e3:.2f} | {s['error']:.1e} | {d['cells']} | {d['tol']:.1e} | "
                f"{d['solve_s'] * 1e3:.3f} | {d['error']:.1e} | "
                f"{ratio(s['solve_s'] / d['solve_s'])} |"
            )
    # The same discretisation: at 40 cells and tight tolerances both sides' errors are the
    # mesh's own error, so they agree to the time error left.
    same = []
    for name in ["P1", "P2", "P3", "P4"]:
        p = data[name]
        _, err = scipy_solve(p, 40, 1e-9)
        tight = [e for e in p["dampfront"] if e["cells"] == 40]
        d = min(tight, key=lambda e: e["tol"])
        same.append(f"{name} {err:.3e} / {d['error']:.3e}")
    print("same mesh, 40 cells, scipy rtol 1e-9 / dampfront tol 1e-7, error: " + ", ".join(same))
    # Whole runs for P3 at each side's cheapest setting reaching 1e-4.
    s = chosen.get("scipy")
    if s is not None:
        csv = work / "p3_curve.csv"
        py = median_wall([
            sys.executable, str(pathlib.Path(__file__).resolve()), "--p3-alone",
            str(work / "peer.json"), str(s["cells"]), str(s["tol"]), str(csv),
        ])
        exe = pathlib.Path(os.environ.get("CARGO_TARGET_DIR", ROOT / "target")) / "release" / "dampfront"
        out = work / "out"
        out.mkdir(exist_ok=True)
        df = median_wall([str(exe), "solve", str(book), "--out", str(out)])
        d = chosen["dampfront"]
        print(
            f"whole run, P3 at 1e-4 (median of 7): this script for P3 alone "
            f"({s['cells']} cells, rtol {s['tol']:.1e}; start, imports, solve, CSV out) "
            f"{py * 1e3:.0f} ms; `dampfront solve` on a P3 workbook ({d['cells']} cells, "
            f"tol {d['tol']:.1e}; xlsx in, result workbook with charts out) {df * 1e3:.1f} ms; "
            f"ratio {ratio(py / df)}"
        )


if __name__ == "__main__":
    main()
