//! Neighbour search: which obstacles or particles can touch a given point.
//!
//! Fixed obstacles are static, so their candidates are binned once:
//! [`ObstacleGrid`] holds, for every cell of a uniform grid, the obstacles
//! (periodic images included, already shifted into place) whose excluded
//! region reaches into that cell, so "is this centre inside an obstacle?" is
//! one cell lookup and a handful of distance tests. [`ObstacleKdTree`] answers
//! the same question with a k-d tree (kiddo) over the centres and their
//! periodic images; it is kept as a second, independent path and for
//! benchmarks (the grid is faster, see `engine/benches/crowding.rs`), and
//! [`blocked_brute_force`] is the slow reference both are tested against.
//!
//! Mobile particles use a [`VerletList`] with a skin, built through a cell
//! list, and [`DynamicGrid`] serves sequential insertion during placement.

use crate::space::bodies::Fibres;
use crate::space::bodies::Spheres;
use crate::space::sim_box::SimBox;
use kiddo::{ImmutableKdTree, SquaredEuclidean};
use rayon::prelude::*;

/// Largest number of cells an [`ObstacleGrid`] allocates (about 64 MB of
/// offsets); beyond it cells grow, which only costs a few more candidates.
const MAX_GRID_CELLS: usize = 1 << 24;
/// Grid cell edge as a fraction of the excluded radius: a measured sweet spot
/// between few candidates per cell and few copies per obstacle.
const GRID_CELL_OVER_RADIUS: f64 = 0.7;
/// Obstacles are listed in every cell within this many cell edges of their
/// excluded region, so that [`ObstacleGrid::clearance`] can vouch for a ball
/// reaching that far past the cell's faces.
const GRID_MARGIN_IN_CELLS: f64 = 0.5;
/// Largest number of cells a [`DynamicGrid`] or cell list allocates.
const MAX_DYNAMIC_CELLS: usize = 1 << 22;
/// Particles per rayon task when building Verlet lists.
const VERLET_CHUNK: usize = 1024;

/// Per-axis offsets of the periodic images to consider: −1, 0, 1 on periodic
/// axes, 0 on walled ones.
fn image_shifts(sim_box: &SimBox) -> Vec<[f64; 3]> {
    let range = |k: usize| if sim_box.periodic[k] { -1..=1 } else { 0..=0 };
    let mut out = Vec::with_capacity(27);
    for i in range(0) {
        for j in range(1) {
            for k in range(2) {
                out.push([
                    i as f64 * sim_box.edges_nm[0],
                    j as f64 * sim_box.edges_nm[1],
                    k as f64 * sim_box.edges_nm[2],
                ]);
            }
        }
    }
    out
}

/// Separation vector b − a under the minimum-image convention on periodic axes.
#[inline(always)]
pub fn min_image_delta(sim_box: &SimBox, a: &[f64; 3], b: &[f64; 3]) -> [f64; 3] {
    let mut d = [b[0] - a[0], b[1] - a[1], b[2] - a[2]];
    for (k, dk) in d.iter_mut().enumerate() {
        if sim_box.periodic[k] {
            let l = sim_box.edges_nm[k];
            *dk -= l * (*dk / l).round();
        }
    }
    d
}

/// Squared minimum-image distance between two points.
#[inline(always)]
pub fn min_image_distance2(sim_box: &SimBox, a: &[f64; 3], b: &[f64; 3]) -> f64 {
    let d = min_image_delta(sim_box, a, b);
    d[0] * d[0] + d[1] * d[1] + d[2] * d[2]
}

/// 1.5·2^52: adding and subtracting it rounds an f64 of magnitude below 2^51
/// to the nearest whole number without a branch (IEEE round-to-nearest).
const ROUNDING_SHIFT: f64 = 6_755_399_441_055_744.0;

/// Minimum-image arithmetic for points inside the box, without branches
/// (a branch per axis mispredicts for pairs that straddle a face).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MinImage {
    edges: [f64; 3],
    inverse: [f64; 3],
}

impl MinImage {
    /// For a box; walled axes are never wrapped.
    pub fn new(sim_box: &SimBox) -> Self {
        let inverse = [0, 1, 2].map(|k| {
            if sim_box.periodic[k] {
                1.0 / sim_box.edges_nm[k]
            } else {
                0.0
            }
        });
        Self {
            edges: sim_box.edges_nm,
            inverse,
        }
    }

    /// Minimum-image separation b − a between two points in the box.
    #[inline(always)]
    pub fn delta(&self, a: &[f64; 3], b: &[f64; 3]) -> [f64; 3] {
        [0, 1, 2].map(|k| {
            let d = b[k] - a[k];
            let wraps = (d * self.inverse[k] + ROUNDING_SHIFT) - ROUNDING_SHIFT;
            d - self.edges[k] * wraps
        })
    }

    /// Squared minimum-image distance between two points in the box.
    #[inline(always)]
    pub fn distance2(&self, a: &[f64; 3], b: &[f64; 3]) -> f64 {
        let mut s = 0.0;
        for k in 0..3 {
            let d = b[k] - a[k];
            let wraps = (d * self.inverse[k] + ROUNDING_SHIFT) - ROUNDING_SHIFT;
            let d = d - self.edges[k] * wraps;
            s += d * d;
        }
        s
    }
}

/// Squared distance from point `p` to the segment `centre ± half_length · direction`.
#[inline(always)]
pub fn segment_distance2(
    p: &[f64; 3],
    centre: &[f64; 3],
    direction: &[f64; 3],
    half_length: f64,
) -> f64 {
    let v = [p[0] - centre[0], p[1] - centre[1], p[2] - centre[2]];
    let t = (v[0] * direction[0] + v[1] * direction[1] + v[2] * direction[2])
        .clamp(-half_length, half_length);
    let w = [
        v[0] - t * direction[0],
        v[1] - t * direction[1],
        v[2] - t * direction[2],
    ];
    w[0] * w[0] + w[1] * w[1] + w[2] * w[2]
}

/// One image of a capsule (fibre) in an [`ObstacleGrid`] cell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Capsule {
    /// Midpoint of the axis segment, image-shifted, nm.
    pub centre: [f64; 3],
    /// Unit direction of the axis.
    pub direction: [f64; 3],
    /// Half the segment's length, nm.
    pub half_length: f64,
    /// Squared reach (tracer radius + fibre radius), nm².
    pub reach2: f64,
}

/// Cell geometry shared by the grids.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Cells {
    n: [usize; 3],
    edge: [f64; 3],
    inv_edge: [f64; 3],
}

impl Cells {
    /// Cells of edge at least `min_edge_nm` (but never more than `max_cells`).
    fn new(sim_box: &SimBox, min_edge_nm: f64, max_cells: usize) -> Self {
        let mut edge_target = min_edge_nm.max(1e-12);
        loop {
            let n =
                [0, 1, 2].map(|k| ((sim_box.edges_nm[k] / edge_target).floor() as usize).max(1));
            if n[0].saturating_mul(n[1]).saturating_mul(n[2]) <= max_cells {
                let edge = [0, 1, 2].map(|k| sim_box.edges_nm[k] / n[k] as f64);
                return Self {
                    n,
                    edge,
                    inv_edge: edge.map(|e| 1.0 / e),
                };
            }
            edge_target *= 1.25;
        }
    }

    fn count(&self) -> usize {
        self.n[0] * self.n[1] * self.n[2]
    }

    #[inline(always)]
    fn axis_index(&self, k: usize, x: f64) -> usize {
        // Through i32, a single conversion instruction; the clamp catches round-off
        // just outside [0, L) (and anything stranger) without a branch.
        ((x * self.inv_edge[k]) as i32).clamp(0, self.n[k] as i32 - 1) as usize
    }

    #[inline(always)]
    fn flat(&self, i: [usize; 3]) -> usize {
        (i[0] * self.n[1] + i[1]) * self.n[2] + i[2]
    }

    #[inline(always)]
    fn index_of(&self, p: &[f64; 3]) -> usize {
        self.flat([
            self.axis_index(0, p[0]),
            self.axis_index(1, p[1]),
            self.axis_index(2, p[2]),
        ])
    }

    /// Range of cell indices along axis k overlapping [lo, hi], or None if outside the box.
    fn axis_range(&self, k: usize, lo: f64, hi: f64, length: f64) -> Option<(usize, usize)> {
        if hi < 0.0 || lo > length {
            return None;
        }
        Some((
            self.axis_index(k, lo.max(0.0)),
            self.axis_index(k, hi.min(length)),
        ))
    }

    /// Distinct neighbour cells (±1 per axis, wrapped on periodic axes) of a cell.
    fn neighbours(&self, i: [usize; 3], periodic: [bool; 3]) -> Vec<usize> {
        self.neighbours_within(i, periodic, 1)
    }

    /// Distinct cells within `m` cells per axis of a cell (wrapped on periodic axes).
    fn neighbours_within(&self, i: [usize; 3], periodic: [bool; 3], m: isize) -> Vec<usize> {
        let mut axis: [Vec<usize>; 3] = Default::default();
        for k in 0..3 {
            let n = self.n[k] as isize;
            for d in -m..=m {
                let j = i[k] as isize + d;
                let j = if periodic[k] {
                    j.rem_euclid(n)
                } else if (0..n).contains(&j) {
                    j
                } else {
                    continue;
                };
                if !axis[k].contains(&(j as usize)) {
                    axis[k].push(j as usize);
                }
            }
        }
        let mut out = Vec::with_capacity(27);
        for &a in &axis[0] {
            for &b in &axis[1] {
                for &c in &axis[2] {
                    out.push(self.flat([a, b, c]));
                }
            }
        }
        out
    }

    fn unflatten(&self, c: usize) -> [usize; 3] {
        [
            c / (self.n[1] * self.n[2]),
            (c / self.n[2]) % self.n[1],
            c % self.n[2],
        ]
    }
}

/// Uniform grid of candidate obstacles for point queries: the fast path of the
/// step kernels.
///
/// Built for one tracer radius `a`: a sphere of radius b excludes centres
/// closer than a + b, a fibre of radius r_f those closer than a + r_f to its
/// axis segment. Every cell lists the (image-shifted) obstacles whose excluded
/// region meets the cell, so a query needs no minimum-image arithmetic.
#[derive(Debug, Clone)]
pub struct ObstacleGrid {
    cells: Cells,
    margin_nm: f64,
    sphere_start: Vec<u32>,
    spheres: Vec<[f64; 4]>,
    capsule_start: Vec<u32>,
    capsules: Vec<Capsule>,
}

/// Squared distance from a point to an axis-aligned box.
fn point_box_distance2(p: &[f64; 3], lo: &[f64; 3], hi: &[f64; 3]) -> f64 {
    let mut d2 = 0.0;
    for k in 0..3 {
        let d = if p[k] < lo[k] {
            lo[k] - p[k]
        } else if p[k] > hi[k] {
            p[k] - hi[k]
        } else {
            0.0
        };
        d2 += d * d;
    }
    d2
}

/// Turns (cell, item) pairs into compressed rows, keeping insertion order within a cell.
fn compress<T: Copy>(ncells: usize, mut pairs: Vec<(u32, T)>) -> (Vec<u32>, Vec<T>) {
    pairs.sort_by_key(|p| p.0);
    let mut start = vec![0u32; ncells + 1];
    for (c, _) in &pairs {
        start[*c as usize + 1] += 1;
    }
    for c in 0..ncells {
        start[c + 1] += start[c];
    }
    (start, pairs.into_iter().map(|p| p.1).collect())
}

impl ObstacleGrid {
    /// Bins `spheres` and `fibres` for a tracer of radius `tracer_radius_nm`.
    pub fn build(
        spheres: &Spheres,
        fibres: &Fibres,
        tracer_radius_nm: f64,
        sim_box: &SimBox,
    ) -> Self {
        Self::build_with(
            spheres,
            fibres,
            tracer_radius_nm,
            sim_box,
            GRID_CELL_OVER_RADIUS,
            GRID_MARGIN_IN_CELLS,
        )
    }

    /// As [`ObstacleGrid::build`] with cells of `cell_over_radius` times the
    /// mean reach and lists `margin_in_cells` cells past each excluded region
    /// (a sum over every obstacle within a reach needs no margin, and finer cells pay).
    pub fn build_with(
        spheres: &Spheres,
        fibres: &Fibres,
        tracer_radius_nm: f64,
        sim_box: &SimBox,
        cell_over_radius: f64,
        margin_in_cells: f64,
    ) -> Self {
        let a = tracer_radius_nm;
        let mut reach_sum = 0.0;
        let mut reach_n = 0usize;
        for &b in &spheres.radii_nm {
            reach_sum += a + b;
            reach_n += 1;
        }
        if !fibres.is_empty() {
            reach_sum += (a + fibres.radius_nm) * fibres.len() as f64;
            reach_n += fibres.len();
        }
        let mean_reach = if reach_n == 0 {
            sim_box
                .edges_nm
                .iter()
                .cloned()
                .fold(f64::INFINITY, f64::min)
        } else {
            reach_sum / reach_n as f64
        };
        let cells = Cells::new(sim_box, cell_over_radius * mean_reach, MAX_GRID_CELLS);
        let margin_nm = margin_in_cells * cells.edge.iter().cloned().fold(f64::INFINITY, f64::min);
        let shifts = image_shifts(sim_box);

        let mut sphere_pairs: Vec<(u32, [f64; 4])> = Vec::new();
        for (c, &b) in spheres.centres_nm.iter().zip(&spheres.radii_nm) {
            let reach = a + b;
            let listed = reach + margin_nm;
            for s in &shifts {
                let q = [c[0] + s[0], c[1] + s[1], c[2] + s[2]];
                let mut ranges = [(0, 0); 3];
                let mut inside = true;
                for k in 0..3 {
                    match cells.axis_range(k, q[k] - listed, q[k] + listed, sim_box.edges_nm[k]) {
                        Some(r) => ranges[k] = r,
                        None => inside = false,
                    }
                }
                if !inside {
                    continue;
                }
                for i in ranges[0].0..=ranges[0].1 {
                    for j in ranges[1].0..=ranges[1].1 {
                        for k in ranges[2].0..=ranges[2].1 {
                            let lo = [
                                i as f64 * cells.edge[0],
                                j as f64 * cells.edge[1],
                                k as f64 * cells.edge[2],
                            ];
                            let hi = [
                                lo[0] + cells.edge[0],
                                lo[1] + cells.edge[1],
                                lo[2] + cells.edge[2],
                            ];
                            if point_box_distance2(&q, &lo, &hi) <= listed * listed {
                                sphere_pairs.push((
                                    cells.flat([i, j, k]) as u32,
                                    [q[0], q[1], q[2], reach * reach],
                                ));
                            }
                        }
                    }
                }
            }
        }

        let mut capsule_pairs: Vec<(u32, Capsule)> = Vec::new();
        if !fibres.is_empty() {
            let reach = a + fibres.radius_nm;
            let h = 0.5 * fibres.length_nm;
            let half_diag = 0.5
                * (cells.edge[0].powi(2) + cells.edge[1].powi(2) + cells.edge[2].powi(2)).sqrt();
            for (c, d) in fibres.centres_nm.iter().zip(&fibres.directions) {
                for s in &shifts {
                    let q = [c[0] + s[0], c[1] + s[1], c[2] + s[2]];
                    let mut ranges = [(0, 0); 3];
                    let mut inside = true;
                    for k in 0..3 {
                        let ext = h * d[k].abs() + reach + margin_nm;
                        match cells.axis_range(k, q[k] - ext, q[k] + ext, sim_box.edges_nm[k]) {
                            Some(r) => ranges[k] = r,
                            None => inside = false,
                        }
                    }
                    if !inside {
                        continue;
                    }
                    let cap = Capsule {
                        centre: q,
                        direction: *d,
                        half_length: h,
                        reach2: reach * reach,
                    };
                    // A cell is kept when its centre is within reach + half a diagonal of the
                    // segment: a superset of the cells the capsule meets, which is all that matters.
                    let keep2 = (reach + margin_nm + half_diag).powi(2);
                    for i in ranges[0].0..=ranges[0].1 {
                        for j in ranges[1].0..=ranges[1].1 {
                            for k in ranges[2].0..=ranges[2].1 {
                                let mid = [
                                    (i as f64 + 0.5) * cells.edge[0],
                                    (j as f64 + 0.5) * cells.edge[1],
                                    (k as f64 + 0.5) * cells.edge[2],
                                ];
                                if segment_distance2(&mid, &q, d, h) <= keep2 {
                                    capsule_pairs.push((cells.flat([i, j, k]) as u32, cap));
                                }
                            }
                        }
                    }
                }
            }
        }
        let ncells = cells.count();
        let (sphere_start, spheres) = compress(ncells, sphere_pairs);
        let (capsule_start, capsules) = if capsule_pairs.is_empty() {
            (Vec::new(), Vec::new())
        } else {
            compress(ncells, capsule_pairs)
        };
        Self {
            cells,
            margin_nm,
            sphere_start,
            spheres,
            capsule_start,
            capsules,
        }
    }

    /// The obstacles the cell of `p` (inside the box) lists: spheres as
    /// [x, y, z, reach²] and capsules, image-shifted into place.
    #[inline(always)]
    pub fn candidates(&self, p: &[f64; 3]) -> (&[[f64; 4]], &[Capsule]) {
        let c = self.cells.index_of(p);
        let spheres =
            &self.spheres[self.sphere_start[c] as usize..self.sphere_start[c + 1] as usize];
        let capsules = if self.capsule_start.is_empty() {
            &[][..]
        } else {
            &self.capsules[self.capsule_start[c] as usize..self.capsule_start[c + 1] as usize]
        };
        (spheres, capsules)
    }

    /// True when a centre at `p` (inside the box) would overlap an obstacle.
    #[inline(always)]
    pub fn blocked(&self, p: &[f64; 3]) -> bool {
        let c = self.cells.index_of(p);
        let (s, e) = (
            self.sphere_start[c] as usize,
            self.sphere_start[c + 1] as usize,
        );
        for q in &self.spheres[s..e] {
            let d = [p[0] - q[0], p[1] - q[1], p[2] - q[2]];
            if d[0] * d[0] + d[1] * d[1] + d[2] * d[2] < q[3] {
                return true;
            }
        }
        if !self.capsule_start.is_empty() {
            let (s, e) = (
                self.capsule_start[c] as usize,
                self.capsule_start[c + 1] as usize,
            );
            for cap in &self.capsules[s..e] {
                if segment_distance2(p, &cap.centre, &cap.direction, cap.half_length) < cap.reach2 {
                    return true;
                }
            }
        }
        false
    }

    /// For an open point, a lower bound on its distance to every excluded
    /// region (so every point closer than that is open too); negative when
    /// `p` is blocked. The bound stops a margin past the cell's faces,
    /// beyond which the cell's candidates say nothing.
    #[inline]
    pub fn clearance(&self, p: &[f64; 3]) -> f64 {
        let ijk = [0, 1, 2].map(|k| self.cells.axis_index(k, p[k]));
        let c = self.cells.flat(ijk);
        let mut clear = f64::INFINITY;
        for k in 0..3 {
            let lo = ijk[k] as f64 * self.cells.edge[k];
            clear = clear.min(p[k] - lo).min(lo + self.cells.edge[k] - p[k]);
        }
        clear += self.margin_nm;
        let (s, e) = (
            self.sphere_start[c] as usize,
            self.sphere_start[c + 1] as usize,
        );
        for q in &self.spheres[s..e] {
            let d2 = (p[0] - q[0]).powi(2) + (p[1] - q[1]).powi(2) + (p[2] - q[2]).powi(2);
            if d2 < q[3] {
                return -1.0;
            }
            clear = clear.min(d2.sqrt() - q[3].sqrt());
        }
        if !self.capsule_start.is_empty() {
            let (s, e) = (
                self.capsule_start[c] as usize,
                self.capsule_start[c + 1] as usize,
            );
            for cap in &self.capsules[s..e] {
                let d2 = segment_distance2(p, &cap.centre, &cap.direction, cap.half_length);
                if d2 < cap.reach2 {
                    return -1.0;
                }
                clear = clear.min(d2.sqrt() - cap.reach2.sqrt());
            }
        }
        // Shaved by a relative 1e-9 so that rounding can never make the ball reach an obstacle.
        clear.max(0.0) * (1.0 - 1e-9)
    }

    /// Number of cells and of stored obstacle copies (memory diagnostics).
    pub fn size(&self) -> (usize, usize) {
        (self.cells.count(), self.spheres.len() + self.capsules.len())
    }
}

/// Contact queries for reflecting moves (contact.rs): a cell lists every
/// obstacle within the margin of its faces, so a move no longer than the
/// margin from a point of the cell meets only obstacles the cell lists.
impl crate::space::collisions::Surfaces for ObstacleGrid {
    fn horizon_nm(&self) -> f64 {
        self.margin_nm
    }

    fn first_contact(&self, p: &[f64; 3], d: &[f64; 3]) -> Option<(f64, [f64; 3])> {
        use crate::space::collisions::{ball_entry, capsule_entry, widened2};
        let c = self.cells.index_of(p);
        let mut best: Option<(f64, [f64; 3])> = None;
        let (s, e) = (
            self.sphere_start[c] as usize,
            self.sphere_start[c + 1] as usize,
        );
        for q in &self.spheres[s..e] {
            let w = [p[0] - q[0], p[1] - q[1], p[2] - q[2]];
            if let Some(t) = ball_entry(&w, d, widened2(q[3])) {
                if best.is_none_or(|b| t < b.0) {
                    let h = [w[0] + t * d[0], w[1] + t * d[1], w[2] + t * d[2]];
                    let r = (h[0] * h[0] + h[1] * h[1] + h[2] * h[2]).sqrt();
                    best = Some((t, [h[0] / r, h[1] / r, h[2] / r]));
                }
            }
        }
        if !self.capsule_start.is_empty() {
            let (s, e) = (
                self.capsule_start[c] as usize,
                self.capsule_start[c + 1] as usize,
            );
            for cap in &self.capsules[s..e] {
                let w = [
                    p[0] - cap.centre[0],
                    p[1] - cap.centre[1],
                    p[2] - cap.centre[2],
                ];
                let hit =
                    capsule_entry(&w, d, &cap.direction, cap.half_length, widened2(cap.reach2));
                if let Some(h) = hit.filter(|h| best.is_none_or(|b| h.0 < b.0)) {
                    best = Some(h);
                }
            }
        }
        best
    }
}

/// Anything that answers "would a centre here overlap a fixed obstacle?":
/// the step kernel is generic over it so that each path can be measured.
pub trait Blocker: Sync {
    /// True when a centre at `p` (inside the box) would overlap an obstacle.
    fn blocked(&self, p: &[f64; 3]) -> bool;

    /// Negative when `p` is blocked, else a distance within which every
    /// point is open (0 when the path cannot tell, which is always safe).
    #[inline(always)]
    fn clearance(&self, p: &[f64; 3]) -> f64 {
        if self.blocked(p) {
            -1.0
        } else {
            0.0
        }
    }
}

impl Blocker for ObstacleGrid {
    #[inline(always)]
    fn blocked(&self, p: &[f64; 3]) -> bool {
        ObstacleGrid::blocked(self, p)
    }

    #[inline(always)]
    fn clearance(&self, p: &[f64; 3]) -> f64 {
        ObstacleGrid::clearance(self, p)
    }
}

impl Blocker for ObstacleKdTree {
    #[inline(always)]
    fn blocked(&self, p: &[f64; 3]) -> bool {
        ObstacleKdTree::blocked(self, p)
    }
}

/// The brute-force reference ([`blocked_brute_force`]) as a [`Blocker`].
#[derive(Debug, Clone, Copy)]
pub struct BruteForce<'a> {
    /// Spheres.
    pub spheres: &'a Spheres,
    /// Fibres.
    pub fibres: &'a Fibres,
    /// Radius of the moving particle, nm.
    pub tracer_radius_nm: f64,
    /// Box.
    pub sim_box: SimBox,
}

impl Blocker for BruteForce<'_> {
    fn blocked(&self, p: &[f64; 3]) -> bool {
        blocked_brute_force(
            self.spheres,
            self.fibres,
            self.tracer_radius_nm,
            &self.sim_box,
            p,
        )
    }
}

/// k-d tree (kiddo) over sphere centres and the periodic images that can
/// reach into the box: the second, independent query path.
#[derive(Debug)]
pub struct ObstacleKdTree {
    tree: ImmutableKdTree<f64, 3>,
    reach_nm: Vec<f64>,
    max_reach_nm: f64,
    uniform: bool,
}

impl ObstacleKdTree {
    /// Builds the tree for a tracer of radius `tracer_radius_nm`; `None` when
    /// there are no spheres. Fibres are not handled by this path.
    pub fn build(spheres: &Spheres, tracer_radius_nm: f64, sim_box: &SimBox) -> Option<Self> {
        if spheres.is_empty() {
            return None;
        }
        let mut points = Vec::new();
        let mut reach_nm = Vec::new();
        for (c, &b) in spheres.centres_nm.iter().zip(&spheres.radii_nm) {
            let reach = tracer_radius_nm + b;
            for s in image_shifts(sim_box) {
                let q = [c[0] + s[0], c[1] + s[1], c[2] + s[2]];
                // Keep an image only if its excluded ball meets the box.
                let lo = [0.0; 3];
                if point_box_distance2(&q, &lo, &sim_box.edges_nm) <= reach * reach {
                    points.push(q);
                    reach_nm.push(reach);
                }
            }
        }
        let max_reach_nm = reach_nm.iter().cloned().fold(0.0, f64::max);
        let uniform = reach_nm.iter().all(|&r| r == max_reach_nm);
        let tree = ImmutableKdTree::new_from_slice(&points).ok()?;
        Some(Self {
            tree,
            reach_nm,
            max_reach_nm,
            uniform,
        })
    }

    /// True when a centre at `p` (inside the box) would overlap a sphere.
    #[inline]
    pub fn blocked(&self, p: &[f64; 3]) -> bool {
        if self.uniform {
            let nearest = self
                .tree
                .query(p)
                .nearest_one::<SquaredEuclidean<f64>>()
                .execute();
            return nearest.distance < self.max_reach_nm * self.max_reach_nm;
        }
        let mut hit = false;
        let found = self
            .tree
            .query(p)
            .within::<SquaredEuclidean<f64>>(self.max_reach_nm * self.max_reach_nm)
            .unsorted()
            .execute();
        for r in found {
            let reach = self.reach_nm[r.item as usize];
            if r.distance < reach * reach {
                hit = true;
                break;
            }
        }
        hit
    }
}

/// Slow reference: every obstacle tested under the minimum-image convention.
pub fn blocked_brute_force(
    spheres: &Spheres,
    fibres: &Fibres,
    tracer_radius_nm: f64,
    sim_box: &SimBox,
    p: &[f64; 3],
) -> bool {
    for (c, &b) in spheres.centres_nm.iter().zip(&spheres.radii_nm) {
        let reach = tracer_radius_nm + b;
        if min_image_distance2(sim_box, c, p) < reach * reach {
            return true;
        }
    }
    let reach = tracer_radius_nm + fibres.radius_nm;
    for (c, d) in fibres.centres_nm.iter().zip(&fibres.directions) {
        // The nearest image of the segment centre is not always the nearest image
        // of the segment, so every image is tested.
        for s in image_shifts(sim_box) {
            let q = [c[0] + s[0], c[1] + s[1], c[2] + s[2]];
            if segment_distance2(p, &q, d, 0.5 * fibres.length_nm) < reach * reach {
                return true;
            }
        }
    }
    false
}

/// A grid of growable cells for sequential insertion (placement of obstacles
/// and of mobile particles). Cells are at least `reach_nm` wide, so every
/// point within `reach_nm` of a query lies in the 27 surrounding cells.
#[derive(Debug, Clone)]
pub struct DynamicGrid {
    cells: Cells,
    periodic: [bool; 3],
    items: Vec<Vec<u32>>,
    neighbours: Vec<Vec<u32>>,
}

impl DynamicGrid {
    /// An empty grid for interaction distances up to `reach_nm`.
    pub fn new(sim_box: &SimBox, reach_nm: f64) -> Self {
        let cells = Cells::new(sim_box, reach_nm, MAX_DYNAMIC_CELLS);
        let neighbours = (0..cells.count())
            .map(|c| {
                cells
                    .neighbours(cells.unflatten(c), sim_box.periodic)
                    .into_iter()
                    .map(|x| x as u32)
                    .collect()
            })
            .collect();
        Self {
            cells,
            periodic: sim_box.periodic,
            items: vec![Vec::new(); cells.count()],
            neighbours,
        }
    }

    /// Adds item `id` at point `p` (inside the box).
    pub fn insert(&mut self, id: u32, p: &[f64; 3]) {
        let c = self.cells.index_of(p);
        self.items[c].push(id);
    }

    /// Calls `f` with every item in the cells around `p` until `f` returns true;
    /// returns whether it did.
    pub fn any_near(&self, p: &[f64; 3], mut f: impl FnMut(u32) -> bool) -> bool {
        let c = self.cells.index_of(p);
        self.neighbours[c]
            .iter()
            .any(|&n| self.items[n as usize].iter().any(|&id| f(id)))
    }

    /// Whether the grid wraps on each axis.
    pub fn periodic(&self) -> [bool; 3] {
        self.periodic
    }
}

/// Cells of edge at least `reach_nm` with their neighbour table: the cell
/// list from which [`VerletList`]s are built, kept between builds.
#[derive(Debug, Clone)]
pub struct CellList {
    cells: Cells,
    reach_nm: f64,
    row_start: Vec<u32>,
    rows: Vec<[u32; 2]>,
}

impl CellList {
    /// Cells for interaction distances up to `reach_nm`: cells of half that
    /// edge searched two deep, which scans about 40 % fewer candidates than
    /// cells of the full edge searched one deep.
    pub fn new(sim_box: &SimBox, reach_nm: f64) -> Self {
        let cells = Cells::new(sim_box, 0.5 * reach_nm, MAX_DYNAMIC_CELLS);
        // Neighbour cells as runs of consecutive flat indices: particles sorted by
        // cell then sit in one contiguous slice per run (about 25 per cell).
        let mut row_start = vec![0u32];
        let mut rows: Vec<[u32; 2]> = Vec::new();
        for c in 0..cells.count() {
            let mut near = cells.neighbours_within(cells.unflatten(c), sim_box.periodic, 2);
            near.sort_unstable();
            let first = rows.len();
            for x in near {
                let x = x as u32;
                if rows.len() > first && rows[rows.len() - 1][1] + 1 == x {
                    let last = rows.len() - 1;
                    rows[last][1] = x;
                } else {
                    rows.push([x, x]);
                }
            }
            row_start.push(rows.len() as u32);
        }
        // Every point within two cell edges lies in the 125 surrounding cells; cells
        // may have grown past the target to respect the cap, so the edge is what counts.
        let edge = cells.edge.iter().cloned().fold(f64::INFINITY, f64::min);
        Self {
            cells,
            reach_nm: 2.0 * edge,
            row_start,
            rows,
        }
    }

    #[inline(always)]
    fn rows_of(&self, c: usize) -> &[[u32; 2]] {
        &self.rows[self.row_start[c] as usize..self.row_start[c + 1] as usize]
    }

    /// Interaction distance the cells resolve, nm.
    pub fn reach_nm(&self) -> f64 {
        self.reach_nm
    }
}

/// Verlet neighbour list with a skin for mobile hard spheres.
///
/// Pair (i, j) is listed when the two interact and their centres were closer
/// than σ_ij + skin at the build, σ_ij being the contact distance. As long as
/// every position used since then lies within skin/2 of where it was at the
/// build, no pair that is not listed can be in contact (triangle inequality).
#[derive(Debug, Clone)]
pub struct VerletList {
    start: Vec<u32>,
    items: Vec<u32>,
    /// The same neighbours as `items`, given by slot (position in cell order).
    slot_items: Vec<u32>,
    slot_of: Vec<u32>,
    members: Vec<u32>,
    /// Positions at the build, in cell order.
    reference: Vec<[f64; 3]>,
    skin_nm: f64,
}

impl VerletList {
    /// Builds the list from `positions` through `cells`; `radius_nm[i]` is
    /// the contact radius of particle i and `crowder[i]` whether it interacts
    /// with every particle (a pair interacts when at least one of the two is
    /// a crowder). A `cells` too fine for the skin is replaced by a coarser one.
    pub fn build(
        cells: &CellList,
        positions: &[[f64; 3]],
        radius_nm: &[f64],
        crowder: &[bool],
        sim_box: &SimBox,
        skin_nm: f64,
    ) -> Self {
        let max_radius = radius_nm.iter().cloned().fold(0.0, f64::max);
        let reach = 2.0 * max_radius + skin_nm;
        let coarser;
        let table = if cells.reach_nm >= reach {
            cells
        } else {
            coarser = CellList::new(sim_box, reach);
            &coarser
        };
        let grid = &table.cells;
        let ncells = grid.count();
        // Counting sort of particles into cells (particle order kept within a cell).
        let cell_of: Vec<u32> = positions
            .par_iter()
            .map(|p| grid.index_of(p) as u32)
            .collect();
        let mut cell_start = vec![0u32; ncells + 1];
        for &c in &cell_of {
            cell_start[c as usize + 1] += 1;
        }
        for c in 0..ncells {
            cell_start[c + 1] += cell_start[c];
        }
        let mut fill = cell_start.clone();
        let mut members = vec![0u32; positions.len()];
        for (i, &c) in cell_of.iter().enumerate() {
            members[fill[c as usize] as usize] = i as u32;
            fill[c as usize] += 1;
        }
        // Copies in cell order, so the candidate scan reads memory in sequence,
        // and particles visited in cell order, so neighbouring scans share the cache.
        let sorted: Vec<[f64; 3]> = members.par_iter().map(|&j| positions[j as usize]).collect();
        let sorted_reach: Vec<f64> = members.par_iter().map(|&j| radius_nm[j as usize]).collect();
        let sorted_crowder: Vec<bool> = members.par_iter().map(|&j| crowder[j as usize]).collect();
        // A tracer meets crowders only: its scan runs over them alone, in the same
        // (cell) order as a scan of everyone filtered, so its list is the same.
        let crowd_slots: Vec<u32> = (0..members.len() as u32)
            .filter(|&t| sorted_crowder[t as usize])
            .collect();
        let mut crowd_start = vec![0u32; ncells + 1];
        for &t in &crowd_slots {
            crowd_start[cell_of[members[t as usize] as usize] as usize + 1] += 1;
        }
        for c in 0..ncells {
            crowd_start[c + 1] += crowd_start[c];
        }
        let wrap = MinImage::new(sim_box);
        let chunks: Vec<(Vec<u32>, Vec<u32>, Vec<u32>)> = members
            .par_chunks(VERLET_CHUNK)
            .enumerate()
            .map(|(chunk, ids)| {
                let mut counts = Vec::with_capacity(ids.len());
                let mut slots = Vec::with_capacity(ids.len() * 8);
                let mut len = 0;
                for (o, &i) in ids.iter().enumerate() {
                    let slot = chunk * VERLET_CHUNK + o;
                    let p = sorted[slot];
                    let before = len;
                    let (ri, ci) = (sorted_reach[slot] + skin_nm, sorted_crowder[slot]);
                    for run in table.rows_of(cell_of[i as usize] as usize) {
                        if !ci {
                            let (a, b) = (
                                crowd_start[run[0] as usize] as usize,
                                crowd_start[run[1] as usize + 1] as usize,
                            );
                            if slots.len() < len + (b - a) {
                                slots.resize(len + (b - a) + 64, 0);
                            }
                            for &t in &crowd_slots[a..b] {
                                let d2 = wrap.distance2(&p, &sorted[t as usize]);
                                let cut = ri + sorted_reach[t as usize];
                                slots[len] = t;
                                len += usize::from(d2 < cut * cut);
                            }
                            continue;
                        }
                        let (a, b) = (
                            cell_start[run[0] as usize] as usize,
                            cell_start[run[1] as usize + 1] as usize,
                        );
                        if slots.len() < len + (b - a) {
                            slots.resize(len + (b - a) + 64, 0);
                        }
                        // Every candidate is written and only hits are kept: no
                        // unpredictable branch per candidate.
                        for t in a..b {
                            let d2 = wrap.distance2(&p, &sorted[t]);
                            let cut = ri + sorted_reach[t];
                            slots[len] = t as u32;
                            len += usize::from(
                                (d2 < cut * cut) & (ci | sorted_crowder[t]) & (t != slot),
                            );
                        }
                    }
                    counts.push((len - before) as u32);
                }
                slots.truncate(len);
                let items = slots.iter().map(|&t| members[t as usize]).collect();
                (counts, items, slots)
            })
            .collect();
        // Lists come out in cell order; `start` is indexed through `slot_of`.
        let mut start = Vec::with_capacity(positions.len() + 1);
        start.push(0u32);
        let total: usize = chunks.iter().map(|c| c.1.len()).sum();
        let mut items = Vec::with_capacity(total);
        let mut slot_items = Vec::with_capacity(total);
        for (counts, chunk_items, chunk_slots) in chunks {
            for c in counts {
                let last = *start.last().expect("start is never empty");
                start.push(last + c);
            }
            items.extend(chunk_items);
            slot_items.extend(chunk_slots);
        }
        let mut slot_of = vec![0u32; positions.len()];
        for (slot, &i) in members.iter().enumerate() {
            slot_of[i as usize] = slot as u32;
        }
        Self {
            start,
            items,
            slot_items,
            slot_of,
            members,
            reference: sorted,
            skin_nm,
        }
    }

    /// Neighbours of particle `i`.
    #[inline(always)]
    pub fn neighbours(&self, i: usize) -> &[u32] {
        let slot = self.slot_of[i] as usize;
        &self.items[self.start[slot] as usize..self.start[slot + 1] as usize]
    }

    /// Particles in cell order at the build: visiting them in this order
    /// keeps neighbouring particles' data in cache.
    pub fn cell_order(&self) -> &[u32] {
        &self.members
    }

    /// Neighbours of the particle at position `slot` of [`VerletList::cell_order`].
    #[inline(always)]
    pub fn neighbours_at(&self, slot: usize) -> &[u32] {
        &self.items[self.start[slot] as usize..self.start[slot + 1] as usize]
    }

    /// Neighbours of the particle at position `slot` of
    /// [`VerletList::cell_order`], given by their slots: callers that keep
    /// particle data in cell order read nearby memory.
    #[inline(always)]
    pub fn neighbour_slots_at(&self, slot: usize) -> &[u32] {
        &self.slot_items[self.start[slot] as usize..self.start[slot + 1] as usize]
    }

    /// Position of particle `i` in [`VerletList::cell_order`].
    #[inline(always)]
    pub fn slot_of(&self, i: usize) -> usize {
        self.slot_of[i] as usize
    }

    /// Skin, nm.
    pub fn skin_nm(&self) -> f64 {
        self.skin_nm
    }

    /// Squared minimum-image distance of `p` from particle i's position at the build.
    #[inline(always)]
    pub fn drift2(&self, wrap: &MinImage, i: usize, p: &[f64; 3]) -> f64 {
        self.drift2_at(wrap, self.slot_of(i), p)
    }

    /// Squared minimum-image distance of `p` from the position at the build
    /// of the particle at `slot` of [`VerletList::cell_order`].
    #[inline(always)]
    pub fn drift2_at(&self, wrap: &MinImage, slot: usize, p: &[f64; 3]) -> f64 {
        wrap.distance2(&self.reference[slot], p)
    }

    /// True while every point with drift below skin/2 is safe: the largest
    /// squared drift allowed.
    pub fn max_drift2(&self) -> f64 {
        0.25 * self.skin_nm * self.skin_nm
    }

    /// Number of particles the list was built for.
    pub fn len(&self) -> usize {
        self.reference.len()
    }

    /// True when built for no particles.
    pub fn is_empty(&self) -> bool {
        self.reference.is_empty()
    }

    /// Mean number of neighbours per particle (tuning diagnostics).
    pub fn mean_neighbours(&self) -> f64 {
        self.items.len() as f64 / self.len().max(1) as f64
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::base::rng::ParticleRng;

    fn cube(l: f64, periodic: bool) -> SimBox {
        SimBox {
            edges_nm: [l, 0.8 * l, 1.1 * l],
            periodic: [periodic, periodic, true],
        }
    }

    fn random_spheres(n: usize, sim_box: &SimBox, rng: &mut ParticleRng) -> Spheres {
        let centres = (0..n)
            .map(|_| [0, 1, 2].map(|k| rng.uniform() * sim_box.edges_nm[k]))
            .collect();
        let radii = (0..n).map(|_| 1.0 + 2.0 * rng.uniform()).collect();
        Spheres {
            centres_nm: centres,
            radii_nm: radii,
            may_overlap: true,
        }
    }

    fn random_fibres(n: usize, sim_box: &SimBox, rng: &mut ParticleRng) -> Fibres {
        let centres = (0..n)
            .map(|_| [0, 1, 2].map(|k| rng.uniform() * sim_box.edges_nm[k]))
            .collect();
        let directions = (0..n)
            .map(|_| {
                let z: f64 = 2.0 * rng.uniform() - 1.0;
                let ph = 2.0 * std::f64::consts::PI * rng.uniform();
                let s = (1.0 - z * z).sqrt();
                [s * ph.cos(), s * ph.sin(), z]
            })
            .collect();
        Fibres {
            radius_nm: 0.7,
            length_nm: 15.0,
            centres_nm: centres,
            directions,
        }
    }

    // The grid and the k-d tree must agree with the brute-force reference at every point.
    #[test]
    fn grid_and_tree_match_brute_force() {
        for periodic in [true, false] {
            let b = cube(20.0, periodic);
            let mut rng = ParticleRng::for_particle(9, 0);
            let spheres = random_spheres(60, &b, &mut rng);
            let fibres = random_fibres(5, &b, &mut rng);
            let none = Fibres::default();
            for a in [0.0, 0.5] {
                let grid = ObstacleGrid::build(&spheres, &fibres, a, &b);
                let grid_spheres = ObstacleGrid::build(&spheres, &none, a, &b);
                let tree = ObstacleKdTree::build(&spheres, a, &b).unwrap();
                let mut hits = 0;
                for _ in 0..20_000 {
                    let p = [0, 1, 2].map(|k| rng.uniform() * b.edges_nm[k]);
                    let want = blocked_brute_force(&spheres, &fibres, a, &b, &p);
                    assert_eq!(grid.blocked(&p), want, "grid at {p:?}");
                    let want_s = blocked_brute_force(&spheres, &none, a, &b, &p);
                    assert_eq!(grid_spheres.blocked(&p), want_s, "sphere grid at {p:?}");
                    assert_eq!(tree.blocked(&p), want_s, "tree at {p:?}");
                    hits += want as usize;
                }
                // The test must exercise both outcomes.
                assert!(hits > 1000 && hits < 19_000, "hits {hits}");
            }
        }
    }

    #[test]
    fn uniform_tree_uses_nearest_query() {
        let b = cube(30.0, true);
        let spheres = Spheres {
            centres_nm: vec![[1.0, 1.0, 1.0], [15.0, 12.0, 20.0]],
            radii_nm: vec![2.0, 2.0],
            may_overlap: false,
        };
        let tree = ObstacleKdTree::build(&spheres, 0.0, &b).unwrap();
        assert!(tree.uniform);
        // Through the periodic image across the x = 0 face.
        assert!(tree.blocked(&[29.5, 1.0, 1.0]));
        assert!(!tree.blocked(&[27.0, 1.0, 1.0]));
    }

    #[test]
    fn verlet_list_matches_all_pairs() {
        let b = cube(12.0, true);
        let mut rng = ParticleRng::for_particle(4, 1);
        let n = 400;
        let pos: Vec<[f64; 3]> = (0..n)
            .map(|_| [0, 1, 2].map(|k| rng.uniform() * b.edges_nm[k]))
            .collect();
        let radius: Vec<f64> = (0..n).map(|i| if i % 3 == 0 { 0.8 } else { 0.4 }).collect();
        let crowder: Vec<bool> = (0..n).map(|i| i % 5 != 0).collect();
        let cells = CellList::new(&b, 0.5);
        let list = VerletList::build(&cells, &pos, &radius, &crowder, &b, 0.3);
        for i in 0..n {
            let mut want: Vec<u32> = (0..n)
                .filter(|&j| j != i && (crowder[i] || crowder[j]))
                .filter(|&j| {
                    min_image_distance2(&b, &pos[i], &pos[j])
                        < (radius[i] + radius[j] + 0.3f64).powi(2)
                })
                .map(|j| j as u32)
                .collect();
            let mut got = list.neighbours(i).to_vec();
            want.sort_unstable();
            got.sort_unstable();
            assert_eq!(got, want, "particle {i}");
        }
    }

    #[test]
    fn dynamic_grid_finds_wrapped_neighbours() {
        let b = cube(10.0, true);
        let mut g = DynamicGrid::new(&b, 2.0);
        g.insert(7, &[0.1, 4.0, 4.0]);
        assert!(g.any_near(&[9.9, 4.0, 4.0], |id| id == 7));
        assert!(!g.any_near(&[5.0, 4.0, 4.0], |id| id == 7));
    }

    #[test]
    fn segment_distance_is_to_the_nearest_point() {
        let c = [0.0, 0.0, 0.0];
        let d = [0.0, 0.0, 1.0];
        assert_eq!(segment_distance2(&[1.0, 0.0, 0.5], &c, &d, 2.0), 1.0);
        assert_eq!(segment_distance2(&[0.0, 0.0, 5.0], &c, &d, 2.0), 9.0);
    }
}
