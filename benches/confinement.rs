//! Slit throughput: particle-steps per second with hydrodynamic wall
//! corrections (position-dependent D∥, D⊥ and the Itô drift) against the same
//! slit without them, on one and two threads. Target: corrections cost ≤ 2×.
//! Then a cylindrical pore with the cylinder model and Poiseuille flow
//! against the same pore without either (target ≤ 2×), and the curved
//! geometries for reference.
//!
//! Run with `cargo bench --bench confinement`. Figures are best-of-five in one
//! process, the two settings timed in turn, and compared as ratios. Beside
//! wall-clock throughput it reports throughput per CPU-second (the
//! process's user + system time, from /proc/self/stat), which other
//! processes on a shared machine disturb much less.

use std::path::Path;
use std::time::Instant;
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

const COUNT: usize = 200_000;
const STEPS: u64 = 200;

/// A scenario of 2 nm beads with the given box and `[geometry]` body.
fn scenario(edges: &str, geometry: &str, hydro: bool, extra: &str) -> Scenario {
    let text = format!(
        "seed = 17\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = {edges}\n\
         [[species]]\nname = \"bead\"\nradius_nm = 2.0\ncount = {COUNT}\n[integrator]\ndt_s = 1e-10\nsteps = {STEPS}\n\
         [output]\nrecord_every_steps = {STEPS}\n[geometry]\n{geometry}\nwall_hydrodynamics = {hydro}\n{extra}"
    );
    Scenario::from_text(&text, Path::new("bench.toml"), &[]).expect("bench scenario is valid")
}

const SLIT: (&str, &str) = ("[1000.0, 1000.0, 20.0]", "kind = \"slit\"");
const PORE: (&str, &str) = (
    "[20.0, 20.0, 1000.0]",
    "kind = \"cylinder\"\npore_radius_nm = 10.0",
);
const MEMBRANE: (&str, &str) = (
    "[80.0, 80.0, 80.0]",
    "kind = \"membrane\"\nthickness_nm = 40.0\npore_radius_nm = 10.0\npores_x = 2\npores_y = 2",
);

/// CPU time of this process (all threads, user + system), ns, from
/// /proc/self/stat in USER_HZ = 100 ticks; 0 where unavailable.
fn cpu_ns() -> u64 {
    let Ok(stat) = std::fs::read_to_string("/proc/self/stat") else {
        return 0;
    };
    // Fields after the parenthesised command name: state is field 3, utime 14, stime 15.
    let rest = stat.rsplit_once(')').map(|(_, r)| r).unwrap_or("");
    let fields: Vec<&str> = rest.split_whitespace().collect();
    let ticks: u64 = [11, 12]
        .iter()
        .filter_map(|&i| fields.get(i)?.parse::<u64>().ok())
        .sum();
    ticks * 10_000_000
}

/// Poiseuille flow of mean velocity 1 mm/s (V R/D0 ≈ 0.1 for the bead).
const FLOW: &str = "[flow]\nkind = \"poiseuille\"\nmean_velocity_m_per_s = 1e-3\n";

/// Best of `repeats` timings of `STEPS` steps, in particle-steps/s, for
/// every thread count of `threads` × [without, with] corrections; all
/// variants are timed in turn, round after round, so that load from
/// elsewhere falls on each alike. Returns, per thread count,
/// [[wall, cpu] without, [wall, cpu] with].
fn throughput(
    (edges, geometry): (&str, &str),
    threads: &[usize],
    repeats: usize,
) -> Vec<[[f64; 2]; 2]> {
    throughput_of(
        [(edges, geometry, false, ""), (edges, geometry, true, "")],
        threads,
        repeats,
    )
}

/// As [`throughput`] for two given settings (box, geometry, hydrodynamics, further sections).
fn throughput_of(
    settings: [(&str, &str, bool, &str); 2],
    threads: &[usize],
    repeats: usize,
) -> Vec<[[f64; 2]; 2]> {
    let pools: Vec<rayon::ThreadPool> = threads
        .iter()
        .map(|&n| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .expect("thread pool")
        })
        .collect();
    let mut runs: Vec<_> = settings
        .iter()
        .map(|&(edges, geometry, hydro, extra)| {
            let s = scenario(edges, geometry, hydro, extra);
            let c = Stepper::new(&s, &thicket_engine::obstacles::FixedObstacles::default());
            let state = c.initial_state(&s).expect("placement");
            (c, state)
        })
        .collect();
    let mut best = vec![[[f64::INFINITY; 2]; 2]; threads.len()];
    for _ in 0..repeats {
        for (p, pool) in pools.iter().enumerate() {
            for (k, (c, state)) in runs.iter_mut().enumerate() {
                let (t, cpu) = (Instant::now(), cpu_ns());
                pool.install(|| c.advance(state, STEPS));
                best[p][k][0] = best[p][k][0].min(t.elapsed().as_secs_f64());
                best[p][k][1] = best[p][k][1].min((cpu_ns() - cpu) as f64 * 1e-9);
            }
        }
    }
    std::hint::black_box(&runs);
    best.iter()
        .map(|b| b.map(|v| v.map(|t| COUNT as f64 * STEPS as f64 / t)))
        .collect()
}

fn main() {
    println!("slit, gap 20 nm, radius 2 nm, {COUNT} particles × {STEPS} steps (best of 5)");
    let rows = throughput(SLIT, &[1, 2], 5);
    for (threads, [plain, hydro]) in [1, 2].into_iter().zip(rows.iter().copied()) {
        println!(
            "  {threads} thread{}: without corrections {:6.1} M particle-steps/s ({:6.1} M per CPU-s), with {:6.1} M/s ({:6.1} M per CPU-s) \
             → corrections cost {:.2}× wall, {:.2}× CPU (target ≤ 2×)",
            if threads == 1 { " " } else { "s" },
            plain[0] / 1e6,
            plain[1] / 1e6,
            hydro[0] / 1e6,
            hydro[1] / 1e6,
            plain[0] / hydro[0],
            plain[1] / hydro[1]
        );
    }
    let ([p1, h1], [p2, h2]) = (rows[0], rows[1]);
    println!(
        "  speed-up on two threads (wall clock): {:.2}× without, {:.2}× with corrections",
        p2[0] / p1[0],
        h2[0] / h1[0]
    );
    // The target: a pore with the cylinder model and flow against the plain steric pore.
    let (edges, geometry) = PORE;
    let [plain, full] = throughput_of(
        [(edges, geometry, false, ""), (edges, geometry, true, FLOW)],
        &[2],
        5,
    )[0];
    let [_, hydro_only] = throughput_of(
        [(edges, geometry, false, FLOW), (edges, geometry, true, "")],
        &[2],
        5,
    )[0];
    println!(
        "  cylindrical pore r = 10 nm, 2 threads: steric {:6.1} M/s, cylinder model + Poiseuille flow {:6.1} M/s \
         → {:.2}× wall, {:.2}× CPU (target ≤ 2×); cylinder model alone {:6.1} M/s ({:.2}× wall)",
        plain[0] / 1e6,
        full[0] / 1e6,
        plain[0] / full[0],
        plain[1] / full[1],
        hydro_only[0] / 1e6,
        plain[0] / hydro_only[0]
    );
    // For reference: the curved geometries, whose steps look up the nearest wall.
    for (name, g) in [
        ("cylindrical pore r = 10 nm", PORE),
        ("membrane, 2 × 2 pores r = 10 nm", MEMBRANE),
    ] {
        let [plain, hydro] = throughput(g, &[2], 3)[0];
        println!(
            "  {name}, 2 threads: {:6.1} M/s without, {:6.1} M/s with corrections ({:.2}× wall, {:.2}× CPU)",
            plain[0] / 1e6,
            hydro[0] / 1e6,
            plain[0] / hydro[0],
            plain[1] / hydro[1]
        );
    }
}
