mod crowding_support;
use crowding_support::*;

#[test]
fn pilot_obstructed_speed() {
    let sigma = 0.01f64;
    let dt = sigma * sigma / 2.0;
    let text = format!("seed = 1\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [30.0, 30.0, 30.0]\n[[species]]\nname = \"p\"\nradius_nm = 0.0001\ncount = 2000\ndiffusivity_m2_per_s = 1e-18\n[obstacles]\nplacement = \"random\"\nvolume_fraction = 0.3\nradius_nm = 1.0\n[integrator]\ndt_s = {dt}\nsteps = 1\n");
    let sc = scenario(&text);
    let (_o, mut dy, mut st) = prepare(&sc);
    let steps = 20000;
    let t0 = std::time::Instant::now();
    dy.advance(&mut st, steps);
    println!(
        "OBST {:.2} M/s",
        2000.0 * steps as f64 / t0.elapsed().as_secs_f64() / 1e6
    );
}

#[test]
fn pilot_free_speed() {
    let sigma = 0.01f64;
    let dt = sigma * sigma / 2.0;
    let text = format!("seed = 1\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [30.0, 30.0, 30.0]\n[[species]]\nname = \"p\"\nradius_nm = 0.0001\ncount = 2000\ndiffusivity_m2_per_s = 1e-18\n[integrator]\ndt_s = {dt}\nsteps = 1\n");
    let sc = scenario(&text);
    let (_o, mut dy, mut st) = prepare(&sc);
    let steps = 20000;
    let t0 = std::time::Instant::now();
    dy.advance(&mut st, steps);
    println!(
        "FREE {:.2} M/s",
        2000.0 * steps as f64 / t0.elapsed().as_secs_f64() / 1e6
    );
}
