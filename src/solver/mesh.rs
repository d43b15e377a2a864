//! Cell-centred finite-volume mesh, graded towards exposed faces and material boundaries.
//!
//! Positions `s` run from face A (s = 0) to face B (s = total thickness). For a cylinder or
//! sphere face A is the outer surface, so the radius is r = R - s. Face areas and cell volumes
//! are exact for each geometry and normalised by the outer area R^m, so that every extensive
//! quantity is "per m2 of face A". A cylinder's or sphere's cell centre is the cell's volume
//! centroid (a slab's is the mid-point of its faces, which is its centroid): a cell's mean
//! moisture is the value at its centroid for any linear profile, while the faces' mid-point lies
//! about m h² / (12 r) nearer the axis (h the width, r the radius), a large part of a cell near
//! the axis (`centroid_radius`).

use std::ops::Range;

/// Ratio of the largest to the smallest cell in a layer graded towards a material boundary
/// (towards an exposed face, [`grading_for_face`] sets it). Steep gradients sit there early in a
/// run; ratio 8 over 40 cells (about 5.5 % growth per cell) keeps the mesh smooth enough for
/// second-order accuracy.
pub const GRADING_RATIO: f64 = 8.0;

/// The grading ratio (largest over smallest cell) towards an exposed face of a body of geometry
/// index `m` (0 slab, 1 cylinder, 2 sphere) whose layer has `cells` cells, for a surface Biot
/// number `biot` (external over internal conductance; infinite for a fixed surface) and a
/// boundary layer `z` = cells sqrt(D t_first / L²) uniform cells deep at t_first, the earliest
/// time the run reports (output spacing, first profile, first measured point):
///
/// ```text
/// fixed surface:   fixed_face_ratio(m, z, cells)
/// Biot number Bi:  low + (fixed_face_ratio(m, z / k, cells) - low) Bi / (Bi + HALF_BIOT),
///                  k = 1 + BIOT_DEPTH / (Bi + BIOT_DEPTH)
/// ```
///
/// with low = [`FaceGrading::low_biot`], HALF_BIOT 100, BIOT_DEPTH 300. The fixed-surface ratio
/// ([`fixed_face_ratio`]) runs from the full ratio (slab 8, cylinder and sphere 12) for a
/// boundary layer thinner than a cell or so at the first row to the smooth ratio (slab 1,
/// cylinder 1.25, sphere 1.5) for one about two cells deep. Early rows show the boundary layer
/// sqrt(D t) against the surface, which only fine cells there resolve; later rows show the whole
/// profile, which uniform cells resolve best (on a cylinder or sphere, with centres at the volume
/// centroids, a mild grading), so grading only pays for rows earlier than the boundary layer can
/// be resolved.
///
/// The constants were measured against Crank's series with a model of this discretisation (the
/// same faces, centroid centres, fluxes and second-order surface gradient, solved exactly in
/// time): the largest error in mean moisture ratio over output rows tau_f = D t_first / L² apart
/// until MR 0.01 (and half as long again), at 20-160 cells, tau_f 1e-4 to 1e-2 and ratios 1 to
/// 16. Fixed surface, 40 cells, this rule (the previous mesh, mid-point centres and ratio 5, 6, 8
/// whatever the rows, in brackets):
///
/// ```text
/// tau_f  slab               cylinder           sphere
/// 1e-4   1.40e-4 (1.42e-4)  1.33e-4 (1.52e-4)  1.41e-4 (1.82e-4)
/// 1e-3   5.4e-5  (1.42e-4)  6.3e-5  (1.52e-4)  3.3e-5  (1.82e-4)
/// 1e-2   2.2e-5  (1.42e-4)  9.4e-6  (1.52e-4)  5.5e-6  (1.82e-4)
/// ```
///
/// (errors scale as cells^-2 once z >= 2). Over 7 cell counts x 7 tau_f, and 6 x 6 settings
/// between them, the rule's error is within 1.06 (slab), 1.51 (cylinder) and 1.38 (sphere) of the
/// best ratio's, except the sphere at 20 cells with z >= 1.4 (1.95: its best smooth ratio there
/// is 1.65; the sphere's optimum is narrow, 1.4 at 160 cells). Faces of Biot 1-1000 (20-80 cells,
/// the same tau_f): within 1.07-1.22 of the best on geometric average, at worst 2.7 (a sphere at
/// Biot 100 and tau_f 1e-2, 5.2e-6 best, 1.25e-5 here, 1.6e-4 before); small-Biot faces want
/// less grading than the smooth ratio (cylinder 1.1, sphere 1.25 at Biot 1-2), and faces of
/// Biot 20-100 about twice the fixed surface's depth of grading (ratio 3-5 at z around 1); at
/// Biot 1000 and more, k -> 1, they are fixed surfaces. Against the previous mesh, errors at
/// each Biot number fell 2-6 times on geometric average; the worst rise is 1.4 times (a slab at
/// Biot 20, 40 cells, tau_f 1e-3: 5.1e-5 to 7.2e-5).
pub fn grading_for_face(biot: f64, m: u32, z: f64, cells: usize) -> f64 {
    let g = FaceGrading::of(m);
    if biot.is_nan() || biot <= 0.0 {
        return g.low_biot;
    }
    if biot.is_infinite() {
        return fixed_face_ratio(m, z, cells);
    }
    let depth = 1.0 + BIOT_DEPTH / (biot + BIOT_DEPTH);
    let fixed = fixed_face_ratio(m, z / depth, cells);
    g.low_biot + (fixed - g.low_biot) * biot / (biot + HALF_BIOT)
}

/// The grading ratio towards a fixed surface of a body of geometry index `m` whose boundary
/// layer at the first reported time is `z` uniform cells deep, in a layer of `cells` cells (see
/// [`grading_for_face`]): the smooth ratio from y = z (40 / cells)^[`CELLS_EXPONENT`] =
/// [`FaceGrading::y_smooth`] up, the full ratio from [`FaceGrading::y_full`] down, and between
/// them the geometric blend smooth (full / smooth)^f, f = ln(y_smooth / y) / ln(y_smooth / y_full).
/// An unknown depth (NaN) gets the full ratio.
pub fn fixed_face_ratio(m: u32, z: f64, cells: usize) -> f64 {
    let g = FaceGrading::of(m);
    if z.is_nan() {
        return g.full;
    }
    let y = z * (40.0 / cells.max(1) as f64).powf(CELLS_EXPONENT);
    let f = ((g.y_smooth / y).ln() / (g.y_smooth / g.y_full).ln()).clamp(0.0, 1.0);
    let ratio = g.smooth * (g.full / g.smooth).powf(f);
    // A cell at most MAX_GROWTH times its neighbour: a layer of a handful of cells cannot afford
    // the full ratio without starving its interior (5 cells at ratio 8 dried a slab 5 % late
    // against Crank's series, where the smooth ratio is 0.3 % late).
    ratio.min(MAX_GROWTH.powi(cells.max(2) as i32 - 1)).max(1.0)
}

/// The largest width of a cell over its neighbour's towards an exposed face (stretching ratios
/// of 1.1-1.2 are common practice for graded meshes).
pub const MAX_GROWTH: f64 = 1.15;

/// How the grading towards an exposed face of one geometry moves with the boundary layer's depth
/// (see [`grading_for_face`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FaceGrading {
    /// The ratio when the first reported time finds the boundary layer resolved, and for faces of
    /// small Biot number: the most accurate over the later run.
    pub smooth: f64,
    /// The ratio when the boundary layer is thinner than a cell or two at the first reported time.
    pub full: f64,
    /// From this depth y (uniform cells, scaled to 40 cells) up, the smooth ratio.
    pub y_smooth: f64,
    /// From this depth down, the full ratio.
    pub y_full: f64,
    /// The ratio towards a face of small Biot number.
    pub low_biot: f64,
}

impl FaceGrading {
    /// The constants for a slab (m = 0), cylinder (1) or sphere (2).
    pub fn of(m: u32) -> FaceGrading {
        match m {
            0 => FaceGrading {
                smooth: 1.0,
                full: 8.0,
                y_smooth: 1.8,
                y_full: 0.25,
                low_biot: 1.0,
            },
            1 => FaceGrading {
                smooth: 1.25,
                full: 12.0,
                y_smooth: 1.3,
                y_full: 0.4,
                low_biot: 1.1,
            },
            _ => FaceGrading {
                smooth: 1.5,
                full: 12.0,
                y_smooth: 1.3,
                y_full: 0.4,
                low_biot: 1.25,
            },
        }
    }
}

/// The boundary-layer depth is compared at 40 cells: y = z (40 / cells)^0.35. The early rows'
/// error in the mean falls as 1 / cells at a given z (the water lost by then is about z / cells
/// of it), the later rows' as 1 / cells², so a finer mesh gives up the grading at a deeper
/// boundary layer.
pub const CELLS_EXPONENT: f64 = 0.35;

/// The Biot number at which the grading ratio towards a face is half way between the low-Biot
/// and the fixed-surface ratio.
pub const HALF_BIOT: f64 = 100.0;

/// A face of Biot number Bi is graded as a fixed surface would be for a boundary layer
/// 1 + BIOT_DEPTH / (Bi + BIOT_DEPTH) times thinner: twice below Biot 100 or so, the same far
/// above it.
pub const BIOT_DEPTH: f64 = 300.0;

/// The mesh of one body.
#[derive(Debug, Clone)]
pub struct Mesh {
    /// Geometry index m (0 slab, 1 cylinder, 2 sphere).
    pub m: u32,
    /// Outer radius or total thickness, m.
    pub length: f64,
    /// Face positions from face A, n + 1 values.
    pub faces: Vec<f64>,
    /// Cell centre positions from face A, n values: the volume centroid of each cell (the
    /// mid-point of its faces for a slab), so not the faces' mid-point on a cylinder or sphere.
    pub centres: Vec<f64>,
    /// Face areas (r/R)^m, n + 1 values.
    pub areas: Vec<f64>,
    /// Cell volumes per unit outer area, n values.
    pub volumes: Vec<f64>,
    /// Which layer each cell belongs to.
    pub layer_of: Vec<usize>,
    /// The cells of each layer.
    pub layer_cells: Vec<Range<usize>>,
}

/// Which ends of a layer get the fine cells.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Refine {
    /// Fine cells at the layer's side towards face A.
    pub start: bool,
    /// Fine cells at the layer's side towards face B.
    pub end: bool,
    /// With both ends refined: each half is graded as a whole one-face layer (its full ratio)
    /// rather than with the square root of it. Used for a layer exposed to the air on both
    /// faces, so that each face is resolved as well as a one-face layer's.
    pub full_halves: bool,
    /// Largest over smallest cell towards the start side.
    pub start_ratio: f64,
    /// Largest over smallest cell towards the end side.
    pub end_ratio: f64,
}

impl Mesh {
    /// Builds a mesh of layers with the given thicknesses and cell counts, refined where asked.
    pub fn new(m: u32, thicknesses: &[f64], cells: &[usize], refine: &[Refine]) -> Mesh {
        let n = cells.iter().sum();
        let mut faces = Vec::with_capacity(n + 1);
        let mut layer_of = Vec::with_capacity(n);
        let mut layer_cells = Vec::with_capacity(thicknesses.len());
        faces.push(0.0);
        let mut start = 0.0;
        for (layer, ((&thickness, &r), &cells)) in
            thicknesses.iter().zip(refine).zip(cells).enumerate()
        {
            let widths = graded_widths(cells, r);
            let first = layer_of.len();
            let mut s = start;
            for w in widths {
                s += w * thickness;
                faces.push(s);
                layer_of.push(layer);
            }
            // Land exactly on the layer boundary despite round-off in the sum of widths.
            start += thickness;
            if let Some(last) = faces.last_mut() {
                *last = start;
            }
            layer_cells.push(first..layer_of.len());
        }
        let length = start;
        let radius = |s: f64| (length - s).max(0.0);
        let areas: Vec<f64> = faces
            .iter()
            .map(|&s| {
                if m == 0 {
                    1.0
                } else {
                    (radius(s) / length).powi(m as i32)
                }
            })
            .collect();
        let volumes: Vec<f64> = faces
            .windows(2)
            .map(|w| {
                if m == 0 {
                    w[1] - w[0]
                } else {
                    let (ro, ri) = (radius(w[0]), radius(w[1]));
                    let p = m as i32 + 1;
                    (ro.powi(p) - ri.powi(p)) / (f64::from(m + 1) * length.powi(m as i32))
                }
            })
            .collect();
        let centres = faces
            .windows(2)
            .map(|w| {
                if m == 0 {
                    0.5 * (w[0] + w[1])
                } else {
                    length - centroid_radius(radius(w[0]), radius(w[1]), m)
                }
            })
            .collect();
        Mesh {
            m,
            length,
            faces,
            centres,
            areas,
            volumes,
            layer_of,
            layer_cells,
        }
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.centres.len()
    }

    /// Whether the mesh has no cells.
    pub fn is_empty(&self) -> bool {
        self.centres.is_empty()
    }

    /// Smallest cell width, m.
    pub fn min_width(&self) -> f64 {
        self.faces
            .windows(2)
            .map(|w| w[1] - w[0])
            .fold(f64::INFINITY, f64::min)
    }
}

/// The radius of the volume centroid of the shell between radii `ro` > `ri` of a body of
/// geometry index `m` (1 cylinder, 2 sphere): the integral of r r^m dr over that of r^m dr,
///
///   r_c = [(ro^(m+2) - ri^(m+2)) / (m+2)] / [(ro^(m+1) - ri^(m+1)) / (m+1)],
///
/// with the differences of powers divided out (a^p - b^p = (a - b) sum a^k b^(p-1-k)), so a thin
/// shell loses no digits. 2/3 ro for the innermost cell of a cylinder, 3/4 ro of a sphere.
fn centroid_radius(ro: f64, ri: f64, m: u32) -> f64 {
    // sum_{k<p} ro^k ri^(p-1-k), which times (ro - ri) is ro^p - ri^p.
    let power_sum = |p: u32| -> f64 {
        (0..p)
            .map(|k| ro.powi(k as i32) * ri.powi((p - 1 - k) as i32))
            .sum()
    };
    let below = power_sum(m + 1);
    if below > 0.0 {
        f64::from(m + 1) / f64::from(m + 2) * power_sum(m + 2) / below
    } else {
        ro
    }
}

/// Relative cell widths (summing to 1) of one layer: geometric growth away from refined ends.
fn graded_widths(cells: usize, refine: Refine) -> Vec<f64> {
    let raw: Vec<f64> = match (refine.start, refine.end) {
        (false, false) => vec![1.0; cells],
        (true, false) => geometric_with_ratio(cells, refine.start_ratio),
        (false, true) => {
            let mut w = geometric_with_ratio(cells, refine.end_ratio);
            w.reverse();
            w
        }
        (true, true) => {
            let half = cells.div_ceil(2);
            let root = |r: f64| if refine.full_halves { r } else { r.sqrt() };
            let first = geometric_with_ratio(half, root(refine.start_ratio));
            // The second half mirrors the first when both ratios agree (an odd count drops its
            // largest cell); otherwise its largest cell matches the first half's.
            let mut second = if refine.start_ratio == refine.end_ratio {
                let mut w = first.clone();
                w.truncate(cells - half);
                w
            } else {
                geometric_with_ratio(cells - half, root(refine.end_ratio))
            };
            let (big_first, big_second) = (
                first.last().copied().unwrap_or(1.0),
                second.last().copied().unwrap_or(1.0),
            );
            if refine.start_ratio != refine.end_ratio {
                for w in &mut second {
                    *w *= big_first / big_second;
                }
            }
            second.reverse();
            let mut w = first;
            w.extend(second);
            w
        }
    };
    let total: f64 = raw.iter().sum();
    raw.into_iter().map(|w| w / total).collect()
}

/// `cells` widths growing geometrically from 1 to `ratio`.
fn geometric_with_ratio(cells: usize, ratio: f64) -> Vec<f64> {
    if cells <= 1 {
        return vec![1.0; cells];
    }
    let q = ratio.max(1.0).powf(1.0 / (cells - 1) as f64);
    (0..cells).map(|i| q.powi(i as i32)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    const BOTH: Refine = Refine {
        start: true,
        end: true,
        full_halves: false,
        start_ratio: GRADING_RATIO,
        end_ratio: GRADING_RATIO,
    };

    #[test]
    fn volumes_sum_to_the_body() {
        // Slab: thickness; cylinder: R/2 (pi R^2 / (2 pi R)); sphere: R/3 (per outer area).
        for (m, expected) in [(0, 0.03), (1, 0.015), (2, 0.01)] {
            let mesh = Mesh::new(m, &[0.01, 0.02], &[13, 13], &[BOTH, BOTH]);
            let v: f64 = mesh.volumes.iter().sum();
            assert!((v - expected).abs() < 1e-15, "m={m}: {v}");
            assert_eq!(mesh.len(), 26);
            assert_eq!(mesh.faces[13], 0.01);
            assert_eq!(*mesh.faces.last().unwrap_or(&0.0), 0.03);
        }
    }

    #[test]
    fn curved_cell_centres_are_volume_centroids() {
        let outer = Refine {
            start: true,
            end: false,
            full_halves: false,
            start_ratio: 3.0,
            end_ratio: 1.0,
        };
        let radius = 0.02;
        for m in [1, 2] {
            let mesh = Mesh::new(m, &[radius], &[30], &[outer]);
            // The first moment of the body, the integral of r r^m dr over R^m = R^2 / (m + 2),
            // is the sum of each cell's volume times its centroid radius.
            let moment: f64 = mesh
                .volumes
                .iter()
                .zip(&mesh.centres)
                .map(|(v, c)| v * (radius - c))
                .sum();
            let expected = radius * radius / f64::from(m + 2);
            assert!((moment / expected - 1.0).abs() < 1e-13, "m={m}: {moment}");
            // The innermost cell (a full disc or ball) has its centroid at 2/3 or 3/4 of its
            // outer radius.
            let ro = radius - mesh.faces[29];
            let fraction = if m == 1 { 2.0 / 3.0 } else { 0.75 };
            assert!(((radius - mesh.centres[29]) / ro - fraction).abs() < 1e-14);
            // Each centre lies between its faces, further from the axis than the mid-point by
            // about m h^2 / (12 r).
            for (i, c) in mesh.centres.iter().enumerate() {
                let (a, b) = (mesh.faces[i], mesh.faces[i + 1]);
                assert!(a < *c && *c < 0.5 * (a + b), "m={m} cell {i}");
            }
            let (a, b) = (mesh.faces[0], mesh.faces[1]);
            let (h, r) = (b - a, radius - 0.5 * (a + b));
            let shift = 0.5 * (a + b) - mesh.centres[0];
            let expected = f64::from(m) * h * h / (12.0 * r);
            assert!(
                (shift / expected - 1.0).abs() < 1e-3,
                "m={m}: {shift} vs {expected}"
            );
        }
        // A slab's centres stay the faces' mid-points.
        let slab = Mesh::new(0, &[0.02], &[30], &[outer]);
        for (i, c) in slab.centres.iter().enumerate() {
            assert_eq!(*c, 0.5 * (slab.faces[i] + slab.faces[i + 1]));
        }
    }

    #[test]
    fn a_thin_shell_keeps_its_centroid_between_its_faces() {
        // Differences of powers would lose every digit here; the divided-out form does not.
        let (ro, ri) = (1.0, 1.0 - 1e-12);
        for m in [1, 2] {
            let rc = centroid_radius(ro, ri, m);
            assert!(ri <= rc && rc <= ro, "m={m}: {rc}");
            assert!((rc - 0.5 * (ro + ri)).abs() < 1e-15);
        }
    }

    #[test]
    fn the_fixed_surface_ratio_falls_from_full_to_smooth_as_the_boundary_layer_deepens() {
        for m in [0, 1, 2] {
            let g = FaceGrading::of(m);
            assert_eq!(fixed_face_ratio(m, 0.01, 40), g.full);
            assert_eq!(fixed_face_ratio(m, g.y_full, 40), g.full);
            assert_eq!(fixed_face_ratio(m, g.y_smooth, 40), g.smooth);
            assert_eq!(fixed_face_ratio(m, 100.0, 40), g.smooth);
            assert_eq!(fixed_face_ratio(m, f64::INFINITY, 40), g.smooth);
            assert_eq!(fixed_face_ratio(m, f64::NAN, 40), g.full);
            // Half way in log y, half way in log ratio.
            let mid = (g.y_full * g.y_smooth).sqrt();
            let r = fixed_face_ratio(m, mid, 40);
            assert!((r - (g.smooth * g.full).sqrt()).abs() < 1e-12, "m={m}: {r}");
            let mut last = f64::INFINITY;
            for k in 0..200 {
                let z = 0.1 * 1.03f64.powi(k);
                let r = fixed_face_ratio(m, z, 40);
                assert!(r <= last && r >= g.smooth && r <= g.full, "m={m} z={z}");
                last = r;
            }
            // More cells at the same depth: the grading holds on to a deeper boundary layer.
            assert!(fixed_face_ratio(m, 1.2, 160) > fixed_face_ratio(m, 1.2, 40));
            assert!(fixed_face_ratio(m, 1.2, 20) < fixed_face_ratio(m, 1.2, 40));
        }
    }

    #[test]
    fn a_biot_face_blends_the_low_biot_and_the_fixed_surface_ratio() {
        for m in [0, 1, 2] {
            let g = FaceGrading::of(m);
            let z = 0.8;
            assert_eq!(
                grading_for_face(f64::INFINITY, m, z, 40),
                fixed_face_ratio(m, z, 40)
            );
            assert_eq!(grading_for_face(0.0, m, z, 40), g.low_biot);
            assert_eq!(grading_for_face(f64::NAN, m, z, 40), g.low_biot);
            // Biot 100: half way, towards the fixed-surface ratio of a boundary layer
            // 1 + 300 / 400 = 1.75 times thinner.
            let fixed = fixed_face_ratio(m, z / 1.75, 40);
            let half = grading_for_face(HALF_BIOT, m, z, 40);
            assert!(
                (half - 0.5 * (g.low_biot + fixed)).abs() < 1e-12,
                "m={m}: {half}"
            );
            // A very large Biot number is a fixed surface.
            let near = grading_for_face(1e9, m, z, 40);
            assert!(
                (near - fixed_face_ratio(m, z, 40)).abs() < 1e-5,
                "m={m}: {near}"
            );
            // A deep boundary layer leaves a Biot 100 face between the low-Biot and the
            // smooth ratio.
            let deep = grading_for_face(HALF_BIOT, m, 100.0, 40);
            assert!((deep - 0.5 * (g.low_biot + g.smooth)).abs() < 1e-12);
        }
    }

    #[test]
    fn grading_ratio_is_respected() {
        let w = graded_widths(
            40,
            Refine {
                start: true,
                end: false,
                full_halves: false,
                start_ratio: GRADING_RATIO,
                end_ratio: GRADING_RATIO,
            },
        );
        assert!((w[39] / w[0] - GRADING_RATIO).abs() < 1e-9);
        assert!((w.iter().sum::<f64>() - 1.0).abs() < 1e-14);
        let odd = graded_widths(9, BOTH);
        assert_eq!(odd.len(), 9);
        assert!((odd[0] - odd[8]).abs() < 1e-15);
    }

    #[test]
    fn a_layer_of_few_cells_is_graded_no_steeper_than_the_growth_limit() {
        // A boundary layer far thinner than a cell at the first row asks for the full ratio;
        // five cells get at most MAX_GROWTH^4, forty the full ratio.
        for m in 0..3 {
            let few = fixed_face_ratio(m, 1e-3, 5);
            assert!(few <= MAX_GROWTH.powi(4) + 1e-12, "m {m}: {few}");
            assert!((fixed_face_ratio(m, 1e-3, 40) - FaceGrading::of(m).full).abs() < 1e-12);
        }
    }
}
