//! Hard contacts resolved within the step instead of by rejecting it.
//!
//! **Fixed obstacles and walls** (single particles): the Gaussian move is
//! followed as a straight segment and reflected specularly at the first
//! contact, as often as needed, for its full length (a billiard path). At a
//! plane wall this is exact for Brownian motion (method of images); at a
//! curved surface it is accurate to the surface's curvature over a step.
//! The straight-path billiard map is volume-preserving and time-reversible
//! (Liouville), and the proposal's direction is isotropic, so the uniform
//! density over the open space is stationary at any Δt, as with rejection.
//!
//! **Mobile hard spheres**: every particle's Gaussian displacement is taken
//! as a constant velocity over the unit of step time, and the step is run as
//! event-driven hard-sphere dynamics: elastic collisions between pairs (masses
//! ∝ 1/D0, so that the displacements are Maxwellian velocities), specular
//! reflections at obstacles and walls, each at the exact time of contact.
//! This is event-driven Brownian dynamics (Scala, Voigtmann & De Michele,
//! J. Chem. Phys. 126, 134109 (2007), from memory). Hamiltonian hard-sphere
//! flow preserves the canonical measure, and velocities are redrawn from the
//! Maxwell distribution every step, so the hard-sphere equilibrium (uniform
//! over non-overlapping configurations) is stationary at any Δt. For an
//! isolated pair the relative coordinate follows the billiard above.
//!
//! Everything here is geometry and bookkeeping on plain arrays; the kernels
//! (integrate.rs, crowders.rs) draw the displacements and own the particles.

use std::cmp::Ordering;
use std::collections::BinaryHeap;

/// How a move that would bring two bodies into overlap is handled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ContactRule {
    /// The whole move is rejected (the default; bias ∝ √Δt).
    #[default]
    Reject,
    /// The move is reflected at the contact (billiard / event-driven step).
    Reflect,
}

impl ContactRule {
    /// Name as written in `[integrator] contact`.
    pub fn name(self) -> &'static str {
        match self {
            ContactRule::Reject => "reject",
            ContactRule::Reflect => "reflect",
        }
    }

    /// The rule named `text`, if any.
    pub fn parse(text: &str) -> Option<Self> {
        match text {
            "reject" => Some(ContactRule::Reject),
            "reflect" => Some(ContactRule::Reflect),
            _ => None,
        }
    }
}

/// Relative widening of every contact distance, so that rounding at a
/// reflection never leaves two bodies overlapping by an ulp (a distance
/// change of 1e-12 is far below anything measured).
pub const CONTACT_WIDENING: f64 = 1e-12;

/// Most events one particle may take part in during one step before the
/// step gives up on it (a safeguard; elastic hard spheres never need it).
const MAX_EVENTS_PER_PARTICLE: usize = 10_000;

#[inline(always)]
fn dot(a: &[f64; 3], b: &[f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

#[inline(always)]
fn sub(a: &[f64; 3], b: &[f64; 3]) -> [f64; 3] {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}

#[inline(always)]
fn axpy(a: f64, x: &[f64; 3], y: &[f64; 3]) -> [f64; 3] {
    [a * x[0] + y[0], a * x[1] + y[1], a * x[2] + y[2]]
}

#[inline(always)]
fn unit(a: &[f64; 3]) -> [f64; 3] {
    let n = dot(a, a).sqrt();
    [a[0] / n, a[1] / n, a[2] / n]
}

/// Squared contact distance `reach2` widened by [`CONTACT_WIDENING`].
#[inline(always)]
pub fn widened2(reach2: f64) -> f64 {
    reach2 * (1.0 + 2.0 * CONTACT_WIDENING)
}

/// Fraction t ∈ [0, 1] of the move `d` at which a point at offset `w` from a
/// ball's centre first touches the ball of squared radius `reach2` while
/// approaching it; 0 when already inside and approaching; None when the
/// segment misses, or moves away.
#[inline(always)]
pub fn ball_entry(w: &[f64; 3], d: &[f64; 3], reach2: f64) -> Option<f64> {
    let b = dot(w, d);
    if b >= 0.0 {
        return None;
    }
    let c = dot(w, w) - reach2;
    if c <= 0.0 {
        return Some(0.0);
    }
    let a = dot(d, d);
    let disc = b * b - a * c;
    if disc < 0.0 {
        return None;
    }
    // The smaller root c / (−b + √disc): no cancellation.
    let t = c / (-b + disc.sqrt());
    (t <= 1.0).then_some(t)
}

/// First contact of the move `d` of a point at offset `w` from a capsule's
/// centre (axis `axis`, a unit vector, half-length `half`, squared reach
/// `reach2`): the fraction t ∈ [0, 1] and the outward unit normal there.
pub fn capsule_entry(
    w: &[f64; 3],
    d: &[f64; 3],
    axis: &[f64; 3],
    half: f64,
    reach2: f64,
) -> Option<(f64, [f64; 3])> {
    let mut best: Option<(f64, [f64; 3])> = None;
    // The side: the infinite cylinder, where the axial coordinate lies within the ends.
    let (wa, da) = (dot(w, axis), dot(d, axis));
    let wp = axpy(-wa, axis, w);
    let dp = axpy(-da, axis, d);
    if let Some(t) = ball_entry(&wp, &dp, reach2) {
        if (wa + t * da).abs() <= half {
            best = Some((t, unit(&axpy(t, &dp, &wp))));
        }
    }
    // The rounded ends: balls at centre ± half·axis (they contain the flat disc ends).
    for s in [-half, half] {
        let we = axpy(-s, axis, w);
        if let Some(t) = ball_entry(&we, d, reach2) {
            if best.is_none_or(|b| t < b.0) {
                best = Some((t, unit(&axpy(t, d, &we))));
            }
        }
    }
    best
}

/// `d` reflected specularly at a surface of unit normal `n`.
#[inline(always)]
pub fn specular(d: &[f64; 3], n: &[f64; 3]) -> [f64; 3] {
    axpy(-2.0 * dot(d, n), n, d)
}

/// Velocities after an elastic collision of bodies with inverse masses
/// `w1`, `w2` along the unit normal `n` (from body 2 to body 1): momentum
/// and kinetic energy are conserved, the normal relative velocity reverses.
#[inline(always)]
pub fn elastic(
    v1: &[f64; 3],
    v2: &[f64; 3],
    w1: f64,
    w2: f64,
    n: &[f64; 3],
) -> ([f64; 3], [f64; 3]) {
    let vn = dot(&sub(v1, v2), n);
    let j = -2.0 * vn / (w1 + w2);
    (axpy(j * w1, n, v1), axpy(-j * w2, n, v2))
}

/// The box as a particle's centre sees it: periodic axes wrap, walled axes
/// confine the centre to [lower, upper].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bounds {
    /// Periodic axes.
    pub periodic: [bool; 3],
    /// Box edges, nm.
    pub edges_nm: [f64; 3],
    /// Lowest centre coordinate on walled axes, nm.
    pub lower_nm: [f64; 3],
    /// Highest centre coordinate on walled axes, nm.
    pub upper_nm: [f64; 3],
}

impl Bounds {
    /// The shift s (whole box edges on periodic axes) that brings `x − s` into [0, L).
    #[inline(always)]
    pub fn wrap_shift(&self, x: &[f64; 3]) -> [f64; 3] {
        std::array::from_fn(|k| {
            if self.periodic[k] {
                (x[k] / self.edges_nm[k]).floor() * self.edges_nm[k]
            } else {
                0.0
            }
        })
    }

    /// `x` wrapped into the box, and the image counts crossed doing so.
    #[inline(always)]
    pub fn wrap(&self, x: &[f64; 3]) -> ([f64; 3], [i32; 3]) {
        let mut y = *x;
        let mut m = [0; 3];
        for k in 0..3 {
            if self.periodic[k] {
                let l = self.edges_nm[k];
                // Inside already (most moves): floor would give 0 and change nothing.
                if y[k] >= 0.0 && y[k] < l {
                    continue;
                }
                let n = (y[k] / l).floor();
                y[k] -= n * l;
                // Rounding can leave exactly L: fold it to 0.
                if y[k] >= l {
                    y[k] -= l;
                    m[k] += 1;
                }
                m[k] += n as i32;
            } else {
                y[k] = y[k].clamp(self.lower_nm[k], self.upper_nm[k]);
            }
        }
        (y, m)
    }

    /// First wall the move `d` from `x` reaches: fraction t ∈ [0, 1] and axis.
    #[inline(always)]
    pub fn wall_hit(&self, x: &[f64; 3], d: &[f64; 3]) -> Option<(f64, usize)> {
        let mut best: Option<(f64, usize)> = None;
        for k in 0..3 {
            if self.periodic[k] || d[k] == 0.0 {
                continue;
            }
            let end = x[k] + d[k];
            let t = if d[k] > 0.0 && end > self.upper_nm[k] {
                (self.upper_nm[k] - x[k]) / d[k]
            } else if d[k] < 0.0 && end < self.lower_nm[k] {
                (self.lower_nm[k] - x[k]) / d[k]
            } else {
                continue;
            };
            let t = t.max(0.0);
            if best.is_none_or(|b| t < b.0) {
                best = Some((t, k));
            }
        }
        best
    }

    /// Minimum-image form of a difference vector shorter than 1.5 box edges per axis.
    #[inline(always)]
    pub fn min_image(&self, d: &[f64; 3]) -> [f64; 3] {
        // Differences of points within a box length of each other: at most one shift.
        let mut out = *d;
        for ((o, &periodic), &l) in out.iter_mut().zip(&self.periodic).zip(&self.edges_nm) {
            if periodic {
                if *o > 0.5 * l {
                    *o -= l;
                } else if *o < -0.5 * l {
                    *o += l;
                }
            }
        }
        out
    }
}

/// Fixed surfaces a centre must not cross (obstacles), queried near a point.
pub trait Surfaces: Sync {
    /// Longest move [`Surfaces::first_contact`] answers for, nm.
    fn horizon_nm(&self) -> f64;

    /// First contact of the move `d` (no longer than the horizon) from the
    /// open point `p` inside the box: fraction t ∈ [0, 1] and outward unit
    /// normal of the surface there.
    fn first_contact(&self, p: &[f64; 3], d: &[f64; 3]) -> Option<(f64, [f64; 3])>;
}

/// No obstacles at all.
#[derive(Debug, Clone, Copy)]
pub struct NoSurfaces;

impl Surfaces for NoSurfaces {
    fn horizon_nm(&self) -> f64 {
        f64::INFINITY
    }

    fn first_contact(&self, _: &[f64; 3], _: &[f64; 3]) -> Option<(f64, [f64; 3])> {
        None
    }
}

/// Legs a billiard path may take before it stops where it is (a safeguard
/// against endless bouncing in a crevice rounding cannot resolve).
const MAX_LEGS: usize = 1000;

/// Follows the move `d` from the open point `x` (inside the box) as a
/// straight path reflected specularly at obstacles and walls. Returns the
/// end point (not wrapped: periodic axes may leave the box) and the number
/// of reflections.
pub fn billiard<S: Surfaces + ?Sized>(
    x: &[f64; 3],
    d: &[f64; 3],
    bounds: &Bounds,
    surfaces: &S,
) -> ([f64; 3], u32) {
    let mut x = *x;
    let mut d = *d;
    let horizon = surfaces.horizon_nm();
    let mut reflections = 0;
    for _ in 0..MAX_LEGS {
        let len = dot(&d, &d).sqrt();
        if len == 0.0 {
            break;
        }
        // Obstacle queries want a point inside the box and a leg within the horizon.
        let shift = bounds.wrap_shift(&x);
        let f = if len > horizon { horizon / len } else { 1.0 };
        let leg = [d[0] * f, d[1] * f, d[2] * f];
        let mut hit = surfaces
            .first_contact(&sub(&x, &shift), &leg)
            .map(|(t, n)| (t * f, n));
        if let Some((t, k)) = bounds.wall_hit(&x, &d) {
            if hit.is_none_or(|h| t < h.0) {
                let mut n = [0.0; 3];
                n[k] = if d[k] > 0.0 { -1.0 } else { 1.0 };
                hit = Some((t, n));
            }
        }
        match hit {
            None if f >= 1.0 => {
                return (axpy(1.0, &d, &x), reflections);
            }
            None => {
                x = axpy(f, &d, &x);
                d = [d[0] * (1.0 - f), d[1] * (1.0 - f), d[2] * (1.0 - f)];
            }
            Some((t, n)) => {
                x = axpy(t, &d, &x);
                let rest = [d[0] * (1.0 - t), d[1] * (1.0 - t), d[2] * (1.0 - t)];
                d = specular(&rest, &n);
                reflections += 1;
            }
        }
    }
    (x, reflections)
}

/// What an event of the event-driven step is.
#[derive(Debug, Clone, Copy)]
enum Kind {
    /// Collision with particle `j`, valid while j has had `cj` velocity changes.
    Pair { j: u32, cj: u32 },
    /// Reflection at an obstacle of this outward normal.
    Surface { n: [f64; 3] },
    /// Reflection at the wall across this axis.
    Wall { axis: u8 },
    /// The obstacle search reached its horizon: search again from here.
    Horizon,
}

/// One scheduled event of particle `i` (valid while i has had `ci` changes).
#[derive(Debug, Clone, Copy)]
struct Event {
    t: f64,
    i: u32,
    ci: u32,
    kind: Kind,
}

impl PartialEq for Event {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == Ordering::Equal
    }
}
impl Eq for Event {}
impl PartialOrd for Event {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Event {
    // Earliest first (BinaryHeap pops the largest), then lowest particle: deterministic.
    fn cmp(&self, other: &Self) -> Ordering {
        other
            .t
            .total_cmp(&self.t)
            .then_with(|| other.i.cmp(&self.i))
    }
}

/// Counters of one event-driven step.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct EventCounts {
    /// Pair collisions.
    pub collisions: u64,
    /// Reflections at obstacles and walls.
    pub reflections: u64,
    /// Particles that stopped early at the safeguard [`MAX_EVENTS_PER_PARTICLE`].
    pub stalled: u64,
}

/// The particles of one event-driven step, by slot.
pub struct EventStep<'a, S: Surfaces> {
    /// Centres at the start of the step, inside the box.
    pub start: &'a [[f64; 3]],
    /// Gaussian displacements of the step (velocities over unit time).
    pub displacement: &'a [[f64; 3]],
    /// Contact radius of each particle.
    pub radius: &'a [f64],
    /// Species of each particle (indexes `bounds`, `surfaces`, `mobility`).
    pub species: &'a [u32],
    /// Free diffusivity of each species (the inverse of its mass here).
    pub mobility: &'a [f64],
    /// The box each species' centres see.
    pub bounds: &'a [Bounds],
    /// Obstacles of each species, if any.
    pub surfaces: &'a [Option<S>],
}

/// Per-particle trajectory state during the step.
struct Flight {
    /// Position at time `t0`.
    x: Vec<[f64; 3]>,
    v: Vec<[f64; 3]>,
    t0: Vec<f64>,
    changes: Vec<u32>,
    path: Vec<f64>,
    events: Vec<u32>,
}

impl Flight {
    #[inline(always)]
    fn at(&self, i: usize, t: f64) -> [f64; 3] {
        axpy(t - self.t0[i], &self.v[i], &self.x[i])
    }

    /// Moves particle i's reference to time t (its velocity unchanged yet).
    fn advance_to(&mut self, i: usize, t: f64) {
        self.x[i] = self.at(i, t);
        self.path[i] += dot(&self.v[i], &self.v[i]).sqrt() * (t - self.t0[i]);
        self.t0[i] = t;
    }
}

impl<S: Surfaces> EventStep<'_, S> {
    /// Runs the step over unit time. `neighbours(i)` lists every particle
    /// that could touch i within the step. Writes the end centres (not
    /// wrapped) to `end` and each particle's path length to `path`.
    pub fn run<'n>(
        &self,
        neighbours: impl Fn(usize) -> &'n [u32],
        end: &mut [[f64; 3]],
        path: &mut [f64],
    ) -> EventCounts {
        let n = self.start.len();
        let mut f = Flight {
            x: self.start.to_vec(),
            v: self.displacement.to_vec(),
            t0: vec![0.0; n],
            changes: vec![0; n],
            path: vec![0.0; n],
            events: vec![0; n],
        };
        let mut counts = EventCounts::default();
        let mut heap = BinaryHeap::new();
        for i in 0..n {
            if let Some(e) = self.next_event(&f, i, 0.0, &neighbours) {
                heap.push(e);
            }
        }
        let mut now = 0.0;
        while let Some(e) = heap.pop() {
            let i = e.i as usize;
            if e.ci != f.changes[i] {
                continue;
            }
            if let Kind::Pair { j, cj } = e.kind {
                if f.changes[j as usize] != cj {
                    // The partner's path changed: find i's next event afresh.
                    if let Some(e) = self.next_event(&f, i, now, &neighbours) {
                        heap.push(e);
                    }
                    continue;
                }
            }
            now = e.t.max(now);
            f.events[i] += 1;
            if f.events[i] as usize > MAX_EVENTS_PER_PARTICLE {
                counts.stalled += 1;
                continue;
            }
            match e.kind {
                Kind::Pair { j, .. } => {
                    let j = j as usize;
                    f.advance_to(i, now);
                    f.advance_to(j, now);
                    let r = self.bounds[0].min_image(&sub(&f.x[i], &f.x[j]));
                    let nrm = unit(&r);
                    let (wi, wj) = (
                        self.mobility[self.species[i] as usize],
                        self.mobility[self.species[j] as usize],
                    );
                    let (vi, vj) = elastic(&f.v[i], &f.v[j], wi, wj, &nrm);
                    f.v[i] = vi;
                    f.v[j] = vj;
                    f.changes[i] += 1;
                    f.changes[j] += 1;
                    counts.collisions += 1;
                    for k in [i, j] {
                        if let Some(e) = self.next_event(&f, k, now, &neighbours) {
                            heap.push(e);
                        }
                    }
                    continue;
                }
                Kind::Surface { n: nrm } => {
                    f.advance_to(i, now);
                    f.v[i] = specular(&f.v[i], &nrm);
                    f.changes[i] += 1;
                    counts.reflections += 1;
                }
                Kind::Wall { axis } => {
                    f.advance_to(i, now);
                    f.v[i][axis as usize] = -f.v[i][axis as usize];
                    f.changes[i] += 1;
                    counts.reflections += 1;
                }
                Kind::Horizon => {}
            }
            if let Some(e) = self.next_event(&f, i, now, &neighbours) {
                heap.push(e);
            }
        }
        for i in 0..n {
            f.advance_to(i, 1.0);
            end[i] = f.x[i];
            path[i] = f.path[i];
        }
        counts
    }

    /// Earliest event of particle i after `now` on current trajectories.
    fn next_event<'n>(
        &self,
        f: &Flight,
        i: usize,
        now: f64,
        neighbours: &impl Fn(usize) -> &'n [u32],
    ) -> Option<Event> {
        let left = 1.0 - now;
        if left <= 0.0 {
            return None;
        }
        let xi = f.at(i, now);
        let vi = f.v[i];
        let mut best: Option<(f64, Kind)> = None;
        let mut consider = |t: f64, kind: Kind| {
            if best.is_none_or(|b| t < b.0) {
                best = Some((t, kind));
            }
        };
        let di = [vi[0] * left, vi[1] * left, vi[2] * left];
        for &j in neighbours(i) {
            let j = j as usize;
            let w = self.bounds[0].min_image(&sub(&xi, &f.at(j, now)));
            let dv = sub(&di, &[f.v[j][0] * left, f.v[j][1] * left, f.v[j][2] * left]);
            let cut = self.radius[i] + self.radius[j];
            if let Some(t) = ball_entry(&w, &dv, widened2(cut * cut)) {
                consider(
                    now + t * left,
                    Kind::Pair {
                        j: j as u32,
                        cj: f.changes[j],
                    },
                );
            }
        }
        let sp = self.species[i] as usize;
        let bounds = &self.bounds[sp];
        if let Some((t, axis)) = bounds.wall_hit(&xi, &di) {
            consider(now + t * left, Kind::Wall { axis: axis as u8 });
        }
        if let Some(s) = &self.surfaces[sp] {
            let len = dot(&di, &di).sqrt();
            let horizon = s.horizon_nm();
            let frac = if len > horizon { horizon / len } else { 1.0 };
            let leg = [di[0] * frac, di[1] * frac, di[2] * frac];
            let shift = bounds.wrap_shift(&xi);
            match s.first_contact(&sub(&xi, &shift), &leg) {
                Some((t, n)) => consider(now + t * frac * left, Kind::Surface { n }),
                None if frac < 1.0 => consider(now + frac * left, Kind::Horizon),
                None => {}
            }
        }
        best.map(|(t, kind)| Event {
            t,
            i: i as u32,
            ci: f.changes[i],
            kind,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn open_box(l: f64) -> Bounds {
        Bounds {
            periodic: [true; 3],
            edges_nm: [l; 3],
            lower_nm: [0.0; 3],
            upper_nm: [l; 3],
        }
    }

    /// One fixed sphere of squared reach `r2` at `c`, within the horizon `h`.
    struct Ball {
        c: [f64; 3],
        r2: f64,
    }

    impl Surfaces for Ball {
        fn horizon_nm(&self) -> f64 {
            f64::INFINITY
        }
        fn first_contact(&self, p: &[f64; 3], d: &[f64; 3]) -> Option<(f64, [f64; 3])> {
            let w = sub(p, &self.c);
            ball_entry(&w, d, widened2(self.r2)).map(|t| (t, unit(&axpy(t, d, &w))))
        }
    }

    #[test]
    fn ball_entry_finds_the_first_crossing() {
        // From x = −3 towards a unit ball at the origin: touches at x = −1, t = 2/4.
        let t = ball_entry(&[-3.0, 0.0, 0.0], &[4.0, 0.0, 0.0], 1.0).unwrap();
        assert!((t - 0.5).abs() < 1e-15);
        // Too short, tangent-missing, and moving away.
        assert_eq!(ball_entry(&[-3.0, 0.0, 0.0], &[1.5, 0.0, 0.0], 1.0), None);
        assert_eq!(ball_entry(&[-3.0, 1.5, 0.0], &[6.0, 0.0, 0.0], 1.0), None);
        assert_eq!(ball_entry(&[-3.0, 0.0, 0.0], &[-1.0, 0.0, 0.0], 1.0), None);
    }

    #[test]
    fn capsule_entry_meets_side_and_ends() {
        let axis = [0.0, 0.0, 1.0];
        // Side: from y = 3 straight down onto a capsule of reach 1 along z.
        let (t, n) = capsule_entry(&[0.0, 3.0, 0.5], &[0.0, -4.0, 0.0], &axis, 2.0, 1.0).unwrap();
        assert!((t - 0.5).abs() < 1e-15 && (n[1] - 1.0).abs() < 1e-15);
        // End: along the axis from z = 6 onto the cap at z = 2 + 1.
        let (t, n) = capsule_entry(&[0.0, 0.0, 6.0], &[0.0, 0.0, -6.0], &axis, 2.0, 1.0).unwrap();
        assert!((t - 0.5).abs() < 1e-15 && (n[2] - 1.0).abs() < 1e-15);
        // Past the end beside the axis: misses.
        assert!(capsule_entry(&[0.0, 3.0, 4.0], &[0.0, -6.0, 0.0], &axis, 2.0, 1.0).is_none());
    }

    #[test]
    fn elastic_collision_conserves_momentum_and_energy() {
        let (v1, v2) = ([1.0, -0.3, 0.2], [-0.5, 0.4, 0.1]);
        let (w1, w2) = (2.0, 0.5);
        let n = unit(&[1.0, 0.2, -0.1]);
        let (a, b) = elastic(&v1, &v2, w1, w2, &n);
        for k in 0..3 {
            let p0 = v1[k] / w1 + v2[k] / w2;
            let p1 = a[k] / w1 + b[k] / w2;
            assert!((p0 - p1).abs() < 1e-14);
        }
        let e0 = dot(&v1, &v1) / w1 + dot(&v2, &v2) / w2;
        let e1 = dot(&a, &a) / w1 + dot(&b, &b) / w2;
        assert!((e0 - e1).abs() < 1e-14);
        let vn0 = dot(&sub(&v1, &v2), &n);
        let vn1 = dot(&sub(&a, &b), &n);
        assert!((vn0 + vn1).abs() < 1e-14);
    }

    // Method of images: specular reflection at a plane wall is the exact law
    // of reflected Brownian motion, so the end point is |x + d − wall| folded.
    #[test]
    fn billiard_at_a_wall_folds_the_move() {
        let b = Bounds {
            periodic: [false, true, true],
            edges_nm: [10.0; 3],
            lower_nm: [1.0, 0.0, 0.0],
            upper_nm: [9.0, 10.0, 10.0],
        };
        let (y, k) = billiard(&[2.0, 5.0, 5.0], &[-3.0, 1.0, 0.0], &b, &NoSurfaces);
        assert_eq!(k, 1);
        // 2 − 3 = −1 folds at the wall x = 1 to 2·1 − (−1) = 3, as `space::reflect` does.
        assert_eq!(crate::space::reflect(-1.0, 1.0, 9.0), 3.0);
        assert!((y[0] - 3.0).abs() < 1e-12 && (y[1] - 6.0).abs() < 1e-12);
    }

    // Billiards are reversible: reversing the final direction retraces the
    // path, so the kernel is symmetric (detailed balance for uniform density).
    #[test]
    fn billiard_is_reversible_and_keeps_the_length() {
        let ball = Ball {
            c: [5.0, 5.0, 5.0],
            r2: 1.0,
        };
        let b = open_box(10.0);
        let x = [3.2, 5.3, 4.9];
        let d = [3.0, 0.1, 0.4];
        // The last leg's direction: from a short step back along the path.
        let (y, k) = billiard(&x, &d, &b, &ball);
        assert_eq!(k, 1);
        let (y_minus, _) = billiard(&x, &[d[0] * 0.999, d[1] * 0.999, d[2] * 0.999], &b, &ball);
        let back = unit(&sub(&y_minus, &y));
        let len = dot(&d, &d).sqrt();
        let (x_again, _) = billiard(
            &y,
            &[back[0] * len, back[1] * len, back[2] * len],
            &b,
            &ball,
        );
        for k in 0..3 {
            assert!((x_again[k] - x[k]).abs() < 1e-9, "{x_again:?} vs {x:?}");
        }
        // Never inside the ball.
        assert!(dot(&sub(&y, &ball.c), &sub(&y, &ball.c)) >= 1.0);
    }

    #[test]
    fn two_spheres_head_on_exchange_velocities() {
        // Equal masses, diameter 1, 0.5 apart at the start of a head-on approach.
        let start = [[4.0, 5.0, 5.0], [5.5, 5.0, 5.0]];
        let disp = [[1.0, 0.0, 0.0], [-1.0, 0.0, 0.0]];
        let b = [open_box(20.0)];
        let step = EventStep::<NoSurfaces> {
            start: &start,
            displacement: &disp,
            radius: &[0.5, 0.5],
            species: &[0, 0],
            mobility: &[1.0],
            bounds: &b,
            surfaces: &[None],
        };
        let lists: [&[u32]; 2] = [&[1], &[0]];
        let mut end = [[0.0; 3]; 2];
        let mut path = [0.0; 2];
        let c = step.run(|i| lists[i], &mut end, &mut path);
        assert_eq!(c.collisions, 1);
        // They touch at t = 0.25 and bounce back: ends at 4.0 − 0.5 and 5.5 + 0.5.
        assert!((end[0][0] - 3.5).abs() < 1e-9 && (end[1][0] - 6.0).abs() < 1e-9);
        assert!((path[0] - 1.0).abs() < 1e-12);
    }

    #[test]
    fn event_step_never_ends_in_overlap() {
        // A dense random crowd with large displacements, checked pair by pair.
        let l = 6.0;
        let b = [open_box(l)];
        let mut start = Vec::new();
        let mut g = crate::base::rng::ParticleRng::for_particle(5, 0);
        for i in 0..6 {
            for j in 0..6 {
                for k in 0..6 {
                    start.push([i as f64 + 0.5, j as f64 + 0.5, k as f64 + 0.5]);
                }
            }
        }
        let n = start.len();
        let all: Vec<Vec<u32>> = (0..n)
            .map(|i| (0..n as u32).filter(|&j| j as usize != i).collect())
            .collect();
        let radius = vec![0.45; n];
        let species = vec![0; n];
        let mut end = vec![[0.0; 3]; n];
        let mut path = vec![0.0; n];
        let mut total = 0;
        for _ in 0..20 {
            let disp: Vec<[f64; 3]> = (0..n)
                .map(|_| std::array::from_fn(|_| 0.3 * crate::base::rng::standard_normal(&mut g)))
                .collect();
            let step = EventStep::<NoSurfaces> {
                start: &start,
                displacement: &disp,
                radius: &radius,
                species: &species,
                mobility: &[1.0],
                bounds: &b,
                surfaces: &[None],
            };
            total += step.run(|i| &all[i], &mut end, &mut path).collisions;
            for i in 0..n {
                start[i] = b[0].wrap(&end[i]).0;
            }
            for i in 0..n {
                for j in i + 1..n {
                    let r = b[0].min_image(&sub(&start[i], &start[j]));
                    assert!(dot(&r, &r) >= 0.81, "overlap {i} {j}");
                }
            }
        }
        assert!(total > 100, "the test needs collisions: {total}");
    }
}
