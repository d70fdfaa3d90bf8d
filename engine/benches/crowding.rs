//! Crowding throughput: particle-steps per second of the kernels with hard
//! contacts, on one and two threads, and the obstacle query paths (uniform
//! grid, kiddo k-d tree, brute force) against each other.
//!
//! Run with `cargo bench -p thicket-engine --bench crowding`. One and two
//! threads are timed in turns, several rounds, and the best of each is
//! kept, so that a noisy spell on a shared machine hurts both alike.

use std::path::Path;
use std::time::Instant;
use thicket_engine::base::rng::ParticleRng;
use thicket_engine::obstacles::spheres::FixedObstacles;
use thicket_engine::scenario::media::Sweep;
use thicket_engine::space::neighbors::{Blocker, BruteForce, ObstacleGrid, ObstacleKdTree};
use thicket_engine::step::pipeline::advance_obstructed;
use thicket_engine::step::{State, Stepper};
use thicket_engine::Scenario;

/// Rounds of interleaved timings.
const ROUNDS: usize = 7;

/// Point tracers (radius 0.001 nm) among fixed random spheres of radius 10 nm at φ = 0.3.
fn fixed_scenario(tracers: usize) -> Scenario {
    let text = format!(
        "seed = 17\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [200.0, 200.0, 200.0]\n\
         [[species]]\nname = \"point\"\nradius_nm = 0.001\ncount = {tracers}\ndiffusivity_m2_per_s = 1e-10\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.3\nradius_nm = 10.0\n\
         [integrator]\ndt_s = 4.5e-10\nsteps = 1000\n"
    );
    Scenario::from_text(&text, Path::new("bench-fixed.toml"), &[]).expect("bench scenario is valid")
}

/// Mobile hard spheres of radius 5 nm at φ = 0.3, rms step 1 % of the diameter.
fn mobile_scenario(count: usize) -> Scenario {
    let edge = (count as f64 * 4.0 / 3.0 * std::f64::consts::PI * 125.0 / 0.3).cbrt();
    let text = format!(
        "seed = 19\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge}, {edge}, {edge}]\n\
         [[species]]\nname = \"crowder\"\nrole = \"crowder\"\nradius_nm = 5.0\ncount = {count}\ndiffusivity_m2_per_s = 1e-10\n\
         [integrator]\ndt_s = 5e-11\nsteps = 1000\n"
    );
    Scenario::from_text(&text, Path::new("bench-mobile.toml"), &[])
        .expect("bench scenario is valid")
}

fn pool(threads: usize) -> rayon::ThreadPool {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("thread pool")
}

/// Seconds taken by `f`.
fn time(f: impl FnOnce()) -> f64 {
    let t = Instant::now();
    f();
    t.elapsed().as_secs_f64()
}

/// Best (shortest) time of each variant, timing the variants in turns for `ROUNDS` rounds.
fn best_in_turns(variants: usize, mut run: impl FnMut(usize) -> f64) -> Vec<f64> {
    let mut best = vec![f64::INFINITY; variants];
    for _ in 0..ROUNDS {
        for (v, b) in best.iter_mut().enumerate() {
            *b = b.min(run(v));
        }
    }
    best
}

fn main() {
    println!("fixed spheres: point tracers among random non-overlapping spheres (b = 10 nm, φ = 0.3), rms step 0.03 b");
    let sc = fixed_scenario(40_000);
    let obstacles = FixedObstacles::build(&sc).expect("placement");
    let dynamics = Stepper::new(&sc, &obstacles);
    let a = sc.species[0].radius_nm;
    let grid = ObstacleGrid::build(&obstacles.spheres, &obstacles.fibres, a, &sc.sim_box);
    let tree = ObstacleKdTree::build(&obstacles.spheres, a, &sc.sim_box).expect("spheres");
    let brute = BruteForce {
        spheres: &obstacles.spheres,
        fibres: &obstacles.fibres,
        tracer_radius_nm: a,
        sim_box: sc.sim_box,
    };
    println!(
        "  {} obstacles; grid {} cells holding {} copies",
        obstacles.spheres.len(),
        grid.size().0,
        grid.size().1
    );
    let start: State = dynamics.initial_state(&sc).expect("tracers fit");
    let pools = [pool(1), pool(2)];
    let n = start.len() as f64;

    // Same kernel, three answers to "is this centre blocked?"; grid on 1 and 2 threads.
    let steps = [200u64, 200, 20, 2];
    let mut states = vec![start.clone(); 4];
    let secs = best_in_turns(4, |v| {
        let st = &mut states[v];
        let kin = dynamics.kinetics();
        match v {
            0 => time(|| {
                pools[0].install(|| {
                    advance_obstructed(st, kin, std::slice::from_ref(&grid), &sc.sim_box, steps[0])
                })
            }),
            1 => time(|| {
                pools[1].install(|| {
                    advance_obstructed(st, kin, std::slice::from_ref(&grid), &sc.sim_box, steps[1])
                })
            }),
            2 => time(|| {
                pools[0].install(|| {
                    advance_obstructed(st, kin, std::slice::from_ref(&tree), &sc.sim_box, steps[2])
                })
            }),
            _ => {
                // Brute force on a tenth of the tracers (it is that slow).
                let mut few = st.clone();
                few.positions.truncate(4000);
                few.images.truncate(4000);
                few.rngs.truncate(4000);
                let mut kin = kin.to_vec();
                kin[0].range = 0..4000;
                let t = time(|| {
                    pools[0].install(|| {
                        advance_obstructed(
                            &mut few,
                            &kin,
                            std::slice::from_ref(&brute),
                            &sc.sim_box,
                            steps[3],
                        )
                    })
                });
                t * 10.0
            }
        }
    });
    let rate: Vec<f64> = secs
        .iter()
        .zip(steps)
        .map(|(s, k)| n * k as f64 / s)
        .collect();
    println!(
        "  grid kernel, 1 thread : {:8.1} M particle-steps/s",
        rate[0] / 1e6
    );
    println!(
        "  grid kernel, 2 threads: {:8.1} M particle-steps/s   speed-up {:.2}×",
        rate[1] / 1e6,
        rate[1] / rate[0]
    );
    println!(
        "  k-d tree kernel, 1 thread   : {:8.2} M particle-steps/s   (grid is {:.1}× faster)",
        rate[2] / 1e6,
        rate[0] / rate[2]
    );
    println!(
        "  brute-force kernel, 1 thread: {:8.3} M particle-steps/s   (grid is {:.0}× faster)",
        rate[3] / 1e6,
        rate[0] / rate[3]
    );

    // Bare queries at uniform random points, one thread.
    let mut rng = ParticleRng::for_particle(5, 0);
    let points: Vec<[f64; 3]> = (0..200_000)
        .map(|_| [0, 1, 2].map(|k| rng.uniform() * sc.sim_box.edges_nm[k]))
        .collect();
    let queries = |f: &dyn Fn(&[f64; 3]) -> bool, pts: &[[f64; 3]]| -> f64 {
        let best = best_in_turns(1, |_| {
            time(|| {
                std::hint::black_box(pts.iter().filter(|p| f(p)).count());
            })
        })[0];
        best / pts.len() as f64 * 1e9
    };
    let tg = queries(&|p| grid.blocked(p), &points);
    let tk = queries(&|p| tree.blocked(p), &points);
    let tb = queries(&|p| Blocker::blocked(&brute, p), &points[..5_000]);
    println!("  one query at a random point: grid {tg:.1} ns, k-d tree {tk:.1} ns, brute force {tb:.0} ns");

    println!("mobile hard spheres: radius 5 nm, φ = 0.3, rms step 1 % of the diameter");
    for count in [20_000usize, 100_000] {
        let sc = mobile_scenario(count);
        let dynamics = Stepper::new(&sc, &FixedObstacles::default());
        let start = dynamics.initial_state(&sc).expect("placement");
        // Variants: in-order sweep (1 thread), parallel sweep on 1 and on 2 threads.
        let mut runs: Vec<(Stepper, State)> = (0..3)
            .map(|v| {
                let mut d = dynamics.clone();
                let c = d.crowd_mut().expect("a crowd");
                c.set_sweep(if v == 0 {
                    Sweep::Sequential
                } else {
                    Sweep::Parallel
                });
                // The parallel algorithm itself, also on one thread.
                c.set_parallel_min(0);
                let mut st = start.clone();
                // One warm-up step builds the neighbour list.
                d.advance(&mut st, 1);
                (d, st)
            })
            .collect();
        let steps = (4_000_000 / count as u64).max(20);
        let secs = best_in_turns(3, |v| {
            let (d, st) = &mut runs[v];
            let p = &pools[if v == 2 { 1 } else { 0 }];
            time(|| {
                p.install(|| d.advance(st, steps));
            })
        });
        let rate: Vec<f64> = secs
            .iter()
            .map(|s| count as f64 * steps as f64 / s)
            .collect();
        println!(
            "  {count} spheres: in-order (sequential) sweep, 1 thread: {:8.2} M particle-steps/s",
            rate[0] / 1e6
        );
        println!(
            "  {count} spheres: parallel sweep, 1 thread            : {:8.2} M particle-steps/s",
            rate[1] / 1e6
        );
        println!(
            "  {count} spheres: parallel sweep, 2 threads           : {:8.2} M particle-steps/s   {:.2}× the parallel sweep on 1 thread, {:.2}× the in-order sweep",
            rate[2] / 1e6,
            rate[2] / rate[1],
            rate[2] / rate[0]
        );
        let (d, _) = &runs[2];
        let c = d.crowd().expect("a crowd");
        let st = c.stats;
        println!(
            "    acceptance {:.3}, dependent moves {:.2e} per move, list builds every {:.1} steps, {:.1} neighbours",
            st.accepted as f64 / st.proposed as f64,
            st.dependent as f64 / st.proposed as f64,
            st.proposed as f64 / count as f64 / st.rebuilds.max(1) as f64,
            c.mean_neighbours()
        );
    }
}
