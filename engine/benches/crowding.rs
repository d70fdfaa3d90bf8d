//! Crowding throughput: particle-steps per second of the kernels with hard
//! contacts, on one and two threads, and the obstacle query paths (uniform
//! grid, kiddo k-d tree, brute force) against each other.
//!
//! Run with `cargo bench -p thicket-engine --bench crowding`. Each figure is
//! the best of a few repeats in one process; shared machines are noisy, so
//! ratios measured side by side mean more than absolute figures.

use std::path::Path;
use std::time::Instant;
use thicket_engine::integrate::{advance_obstructed, Dynamics, State};
use thicket_engine::neighbors::{Blocker, BruteForce, ObstacleGrid, ObstacleKdTree};
use thicket_engine::obstacles::FixedObstacles;
use thicket_engine::rng::ParticleRng;
use thicket_engine::Scenario;

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

/// Best of `repeats` timings of `f`, in seconds.
fn best(repeats: usize, mut f: impl FnMut()) -> f64 {
    (0..repeats)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn obstructed_rate<B: Blocker>(
    sc: &Scenario,
    dynamics: &Dynamics,
    blocker: &B,
    threads: usize,
    steps: u64,
    repeats: usize,
) -> f64 {
    let mut state: State = dynamics.initial_state(sc).expect("tracers fit");
    let p = pool(threads);
    let secs = best(repeats, || {
        p.install(|| {
            advance_obstructed(
                &mut state,
                dynamics.kinetics(),
                std::slice::from_ref(blocker),
                &sc.sim_box,
                steps,
            )
        })
    });
    state.len() as f64 * steps as f64 / secs
}

fn main() {
    println!("fixed spheres: point tracers among random non-overlapping spheres (b = 10 nm, φ = 0.3), rms step 0.03 b");
    let sc = fixed_scenario(40_000);
    let obstacles = FixedObstacles::build(&sc).expect("placement");
    let dynamics = Dynamics::new(&sc, &obstacles);
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
    let g1 = obstructed_rate(&sc, &dynamics, &grid, 1, 250, 3);
    let g2 = obstructed_rate(&sc, &dynamics, &grid, 2, 250, 3);
    println!(
        "  grid kernel, 1 thread : {:8.1} M particle-steps/s",
        g1 / 1e6
    );
    println!(
        "  grid kernel, 2 threads: {:8.1} M particle-steps/s   speed-up {:.2}×",
        g2 / 1e6,
        g2 / g1
    );
    let k1 = obstructed_rate(&sc, &dynamics, &tree, 1, 25, 3);
    println!(
        "  k-d tree kernel, 1 thread: {:8.2} M particle-steps/s   (grid is {:.1}× faster)",
        k1 / 1e6,
        g1 / k1
    );
    let small = fixed_scenario(2_000);
    let small_dyn = Dynamics::new(&small, &obstacles);
    let b1 = obstructed_rate(&small, &small_dyn, &brute, 1, 5, 2);
    println!(
        "  brute-force kernel, 1 thread: {:8.3} M particle-steps/s   (grid is {:.0}× faster)",
        b1 / 1e6,
        g1 / b1
    );

    // Bare queries at uniform random points, one thread.
    let mut rng = ParticleRng::for_particle(5, 0);
    let points: Vec<[f64; 3]> = (0..200_000)
        .map(|_| [0, 1, 2].map(|k| rng.uniform() * sc.sim_box.edges_nm[k]))
        .collect();
    let time_queries = |f: &dyn Fn(&[f64; 3]) -> bool, pts: &[[f64; 3]]| -> f64 {
        let mut hits = 0usize;
        let secs = best(3, || hits = pts.iter().filter(|p| f(p)).count());
        std::hint::black_box(hits);
        secs / pts.len() as f64 * 1e9
    };
    let tg = time_queries(&|p| grid.blocked(p), &points);
    let tk = time_queries(&|p| tree.blocked(p), &points);
    let tb = time_queries(&|p| Blocker::blocked(&brute, p), &points[..5_000]);
    println!("  one query at a random point: grid {tg:.1} ns, k-d tree {tk:.1} ns, brute force {tb:.0} ns");

    println!("mobile hard spheres: radius 5 nm, φ = 0.3, rms step 1 % of the diameter");
    for count in [20_000usize, 100_000] {
        let sc = mobile_scenario(count);
        let none = FixedObstacles::default();
        let mut dynamics = Dynamics::new(&sc, &none);
        let start = dynamics.initial_state(&sc).expect("placement");
        let mut rate = |threads: usize, sequential: bool, steps: u64| -> f64 {
            if let Some(c) = dynamics.crowd_mut() {
                c.set_sweep(if sequential {
                    thicket_engine::crowders::Sweep::Sequential
                } else {
                    thicket_engine::crowders::Sweep::Parallel
                });
            }
            let mut state = start.clone();
            let p = pool(threads);
            // One warm-up step builds the neighbour list.
            p.install(|| dynamics.advance(&mut state, 1));
            let secs = best(3, || p.install(|| dynamics.advance(&mut state, steps)));
            count as f64 * steps as f64 / secs
        };
        let steps = (4_000_000 / count as u64).max(20);
        let s1 = rate(1, true, steps);
        let p1 = rate(1, false, steps);
        let p2 = rate(2, false, steps);
        println!(
            "  {count} spheres: sequential sweep, 1 thread : {:8.2} M particle-steps/s",
            s1 / 1e6
        );
        println!(
            "  {count} spheres: parallel sweep, 1 thread   : {:8.2} M particle-steps/s",
            p1 / 1e6
        );
        println!("  {count} spheres: parallel sweep, 2 threads  : {:8.2} M particle-steps/s   speed-up {:.2}× over 1 thread", p2 / 1e6, p2 / p1);
        if let Some(c) = dynamics.crowd() {
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
}
