mod crowding_support;
use crowding_support::*;

#[test]
fn pilot_speed() {
    let phi: f64 = std::env::var("PHI")
        .map(|v| v.parse().unwrap())
        .unwrap_or(0.3);
    let sigma: f64 = std::env::var("SIGMA")
        .map(|v| v.parse().unwrap())
        .unwrap_or(0.05);
    let n: usize = std::env::var("N")
        .map(|v| v.parse().unwrap())
        .unwrap_or(2000);
    let steps: u64 = std::env::var("STEPS")
        .map(|v| v.parse().unwrap())
        .unwrap_or(5000);
    let dt = sigma * sigma / 2.0;
    let edge = (n as f64 * std::f64::consts::PI / 6.0 / phi).cbrt();
    let text = format!("seed = 1\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge}, {edge}, {edge}]\n[[species]]\nname = \"c\"\nrole = \"crowder\"\nradius_nm = 0.5\ncount = {n}\ndiffusivity_m2_per_s = 1e-18\n[integrator]\ndt_s = {dt}\nsteps = 1\n");
    let sc = scenario(&text);
    let (_o, mut dy, mut st) = prepare(&sc);
    let t0 = std::time::Instant::now();
    dy.advance(&mut st, steps);
    let c = dy.crowd().unwrap();
    println!(
        "SPEED wall {:.2}s {:.2} M/s skin {:.3} nbrs {:.1} stats {:?}",
        t0.elapsed().as_secs_f64(),
        (n as f64 * steps as f64) / t0.elapsed().as_secs_f64() / 1e6,
        c.skin_nm(),
        c.mean_neighbours(),
        c.stats
    );
}

#[test]
fn pilot_build() {
    use thicket_engine::neighbors::{CellList, VerletList};
    let phi = 0.3;
    let n = 2000;
    let edge = (n as f64 * std::f64::consts::PI / 6.0 / phi).cbrt();
    let text = format!("seed = 1\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge}, {edge}, {edge}]\n[[species]]\nname = \"c\"\nrole = \"crowder\"\nradius_nm = 0.5\ncount = {n}\ndiffusivity_m2_per_s = 1e-18\n[integrator]\ndt_s = 0.001\nsteps = 1\n");
    let sc = scenario(&text);
    let (_o, _dy, st) = prepare(&sc);
    let radius = vec![0.5; n];
    let crowder = vec![true; n];
    let cells = CellList::new(&sc.sim_box, 1.94);
    let t0 = std::time::Instant::now();
    let mut total = 0.0;
    for _ in 0..200 {
        let l = VerletList::build(&cells, &st.positions, &radius, &crowder, &sc.sim_box, 0.94);
        total += l.mean_neighbours();
    }
    println!(
        "BUILD {:.3} ms per build, nbrs {} cands {} cells {:?}",
        t0.elapsed().as_secs_f64() / 200.0 * 1e3,
        total / 200.0,
        0,
        edge
    );
}
