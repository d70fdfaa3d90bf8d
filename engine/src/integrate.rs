//! Step kernels: overdamped Langevin dynamics by Euler–Maruyama.
//!
//! Free particles do not interact, so each one is advanced through a whole
//! block of steps while its state sits in registers ("particle-major"); the
//! result is the same as stepping all particles in lock-step, because every
//! particle draws from its own random stream.

use crate::config::{Scenario, SimBox};
use crate::rng::{standard_normal, ParticleRng};
use rayon::prelude::*;
use std::ops::Range;

/// Particles handed to one rayon task: big enough to amortise scheduling,
/// small enough to balance two cores.
const PAR_CHUNK: usize = 2048;

/// Dynamic state of all particles, in scenario species order.
#[derive(Debug, Clone, PartialEq)]
pub struct State {
    /// Centres in nm, wrapped into [0, L) on periodic axes.
    pub positions: Vec<[f64; 3]>,
    /// Periodic image counts: unwrapped = position + image · edges.
    pub images: Vec<[i32; 3]>,
    /// One random stream per particle.
    pub rngs: Vec<ParticleRng>,
    /// Steps taken so far.
    pub step: u64,
}

/// How one species moves: its index range in [`State`] and its step size.
#[derive(Debug, Clone, PartialEq)]
pub struct Kinetics {
    /// Particle indices of the species.
    pub range: Range<usize>,
    /// Per-axis Gaussian step standard deviation √(2 D0 Δt), nm.
    pub sigma_nm: f64,
    /// Lowest allowed centre coordinate per axis (radius on a walled axis).
    pub lower_nm: [f64; 3],
    /// Highest allowed centre coordinate per axis.
    pub upper_nm: [f64; 3],
}

/// Per-species kinetics for a scenario.
pub fn kinetics(scenario: &Scenario) -> Vec<Kinetics> {
    let mut start = 0;
    scenario
        .species
        .iter()
        .map(|s| {
            let range = start..start + s.count;
            start = range.end;
            let mut lower_nm = [0.0; 3];
            let mut upper_nm = scenario.sim_box.edges_nm;
            for k in 0..3 {
                if !scenario.sim_box.periodic[k] {
                    lower_nm[k] = s.radius_nm;
                    upper_nm[k] -= s.radius_nm;
                }
            }
            Kinetics { range, sigma_nm: s.step_rms_nm(scenario.dt_s), lower_nm, upper_nm }
        })
        .collect()
}

impl State {
    /// Initial state: every particle uniformly placed in the space open to its
    /// centre, drawing from its own stream (so placement is thread-independent).
    pub fn initial(scenario: &Scenario) -> Self {
        let n = scenario.particle_count();
        let mut rngs: Vec<ParticleRng> = (0..n as u64).map(|i| ParticleRng::for_particle(scenario.seed, i)).collect();
        let mut positions = vec![[0.0; 3]; n];
        for kin in kinetics(scenario) {
            for i in kin.range.clone() {
                let rng = &mut rngs[i];
                for k in 0..3 {
                    positions[i][k] = kin.lower_nm[k] + rng.uniform() * (kin.upper_nm[k] - kin.lower_nm[k]);
                }
            }
        }
        Self { positions, images: vec![[0; 3]; n], rngs, step: 0 }
    }

    /// Number of particles.
    pub fn len(&self) -> usize {
        self.positions.len()
    }

    /// True when there are no particles.
    pub fn is_empty(&self) -> bool {
        self.positions.is_empty()
    }

    /// Unwrapped position of particle `i`, nm.
    pub fn unwrapped(&self, i: usize, sim_box: &SimBox) -> [f64; 3] {
        let p = self.positions[i];
        let im = self.images[i];
        [0, 1, 2].map(|k| p[k] + im[k] as f64 * sim_box.edges_nm[k])
    }
}

/// Advances free (non-interacting) particles by `steps` steps.
///
/// Periodic axes wrap with image counting; walled axes reflect the centre
/// specularly at `lower_nm`/`upper_nm`.
pub fn advance_free(state: &mut State, kinetics: &[Kinetics], sim_box: &SimBox, steps: u64) {
    for kin in kinetics {
        let r = kin.range.clone();
        let pos = &mut state.positions[r.clone()];
        let img = &mut state.images[r.clone()];
        let rng = &mut state.rngs[r];
        pos.par_chunks_mut(PAR_CHUNK)
            .zip(img.par_chunks_mut(PAR_CHUNK))
            .zip(rng.par_chunks_mut(PAR_CHUNK))
            .for_each(|((p, im), g)| {
                for ((p, im), g) in p.iter_mut().zip(im.iter_mut()).zip(g.iter_mut()) {
                    advance_one_free(p, im, g, kin, sim_box, steps);
                }
            });
    }
    state.step += steps;
}

/// One particle through `steps` free steps; kept inline so the state lives in registers.
#[inline(always)]
fn advance_one_free(p: &mut [f64; 3], im: &mut [i32; 3], g: &mut ParticleRng, kin: &Kinetics, sim_box: &SimBox, steps: u64) {
    let mut x = *p;
    let mut n = *im;
    let sigma = kin.sigma_nm;
    for _ in 0..steps {
        for k in 0..3 {
            x[k] += sigma * standard_normal(g);
            if sim_box.periodic[k] {
                let l = sim_box.edges_nm[k];
                if x[k] >= l {
                    x[k] -= l;
                    n[k] += 1;
                } else if x[k] < 0.0 {
                    x[k] += l;
                    n[k] -= 1;
                }
            } else {
                x[k] = reflect(x[k], kin.lower_nm[k], kin.upper_nm[k]);
            }
        }
    }
    *p = x;
    *im = n;
}

/// Specular reflection of a coordinate into [lo, hi].
#[inline(always)]
pub fn reflect(mut x: f64, lo: f64, hi: f64) -> f64 {
    // A step longer than the gap could need several bounces; loop until inside.
    loop {
        if x < lo {
            x = 2.0 * lo - x;
        } else if x > hi {
            x = 2.0 * hi - x;
        } else {
            return x;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    fn scenario(periodic: &str) -> Scenario {
        let text = format!(
            "seed = 3\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [50.0, 50.0, 50.0]\nperiodic = {periodic}\n\
             [[species]]\nname = \"a\"\nradius_nm = 1.0\ncount = 500\n[[species]]\nname = \"b\"\nradius_nm = 4.0\ncount = 300\n\
             [integrator]\ndt_s = 1e-9\nsteps = 100\n"
        );
        Scenario::from_text(&text, Path::new("t.toml"), &[]).unwrap()
    }

    #[test]
    fn splitting_steps_does_not_change_the_result() {
        let s = scenario("[true, true, false]");
        let kin = kinetics(&s);
        let mut a = State::initial(&s);
        let mut b = a.clone();
        advance_free(&mut a, &kin, &s.sim_box, 100);
        for _ in 0..4 {
            advance_free(&mut b, &kin, &s.sim_box, 25);
        }
        assert_eq!(a, b);
    }

    #[test]
    fn walls_keep_centres_a_radius_away() {
        let s = scenario("[false, false, false]");
        let kin = kinetics(&s);
        let mut st = State::initial(&s);
        advance_free(&mut st, &kin, &s.sim_box, 2000);
        for k in &kin {
            for i in k.range.clone() {
                for ax in 0..3 {
                    let x = st.positions[i][ax];
                    assert!(x >= k.lower_nm[ax] && x <= k.upper_nm[ax], "particle {i} axis {ax}: {x}");
                }
                assert_eq!(st.images[i], [0, 0, 0]);
            }
        }
    }

    #[test]
    fn reflect_folds_back_inside() {
        assert_eq!(reflect(-0.5, 0.0, 10.0), 0.5);
        assert_eq!(reflect(10.5, 0.0, 10.0), 9.5);
        assert_eq!(reflect(25.0, 0.0, 10.0), 5.0);
    }
}
