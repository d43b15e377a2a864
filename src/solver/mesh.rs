//! Cell-centred finite-volume mesh, graded towards exposed faces and material boundaries.
//!
//! Positions `s` run from face A (s = 0) to face B (s = total thickness). For a cylinder or
//! sphere face A is the outer surface, so the radius is r = R - s. Face areas and cell volumes
//! are exact for each geometry and normalised by the outer area R^m, so that every extensive
//! quantity is "per m2 of face A".

use std::ops::Range;

/// Ratio of the largest to the smallest cell in a layer graded towards a material boundary
/// (towards an exposed face, [`grading_for_biot`] sets it). Steep gradients sit there early in a
/// run; ratio 8 over 40 cells (about 5.5 % growth per cell) keeps the mesh smooth enough for
/// second-order accuracy.
pub const GRADING_RATIO: f64 = 8.0;

/// The grading ratio towards an exposed face of surface Biot number `biot` (external over
/// internal conductance; infinite for a fixed surface) on a body of geometry index `m` (0 slab,
/// 1 cylinder, 2 sphere):
///
///   ratio = 1 + (max_face_ratio(m) - 1) * biot / (biot + HALF_BIOT)
///
/// A fixed surface (biot -> inf) starts with a boundary layer of width sqrt(D t) against the
/// surface, which needs the finest cells there; a small-Biot face keeps the profile nearly flat
/// near the surface (the resistance is outside), where uniform cells resolve the interior best.
///
/// The constants were chosen by measuring, with the second-order surface gradient
/// ([`crate::solver::problem::SurfaceGradient`]) and 40 cells, the largest error in mean moisture
/// ratio against Crank's series at times D t / L² from 1e-4 to 1 (the early times a fine output
/// schedule shows as well as the late ones). Fixed surface: the slab is best at ratio 5 (1.3e-4;
/// ratio 3 gives 4.3e-4 at D t / L² = 1e-4, where the boundary layer is thinner than a cell, and
/// ratio 8 1.8e-4 late in the run, where the coarse centre dominates), the cylinder at 6
/// (1.5e-4) and the sphere at 8 (1.8e-4; its surface weighs three times a slab's in the mean).
/// Slab at a finite Biot number: uniform cells are best at Biot 0.5-5 (1.5e-5 at Biot 5; ratio
/// 8 gives 1.2e-4), ratio 2 at Biot 20 (5.5e-5), 4-8 at Biot 100 (1.6-1.7e-4). So HALF_BIOT
/// 100: ratio 1.2 at Biot 5, 1.7 at Biot 20, 3 at Biot 100 on a slab.
pub fn grading_for_biot(biot: f64, m: u32) -> f64 {
    let max = max_face_ratio(m);
    if biot.is_nan() || biot <= 0.0 {
        return 1.0;
    }
    if biot.is_infinite() {
        return max;
    }
    1.0 + (max - 1.0) * biot / (biot + HALF_BIOT)
}

/// The grading ratio towards a fixed surface of a slab (m = 0), cylinder (1) or sphere (2).
pub fn max_face_ratio(m: u32) -> f64 {
    match m {
        0 => 5.0,
        1 => 6.0,
        _ => 8.0,
    }
}

/// The Biot number at which the grading ratio is half way between 1 and [`max_face_ratio`].
pub const HALF_BIOT: f64 = 100.0;

/// The mesh of one body.
#[derive(Debug, Clone)]
pub struct Mesh {
    /// Geometry index m (0 slab, 1 cylinder, 2 sphere).
    pub m: u32,
    /// Outer radius or total thickness, m.
    pub length: f64,
    /// Face positions from face A, n + 1 values.
    pub faces: Vec<f64>,
    /// Cell centre positions from face A, n values.
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
        let centres = faces.windows(2).map(|w| 0.5 * (w[0] + w[1])).collect();
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
}
