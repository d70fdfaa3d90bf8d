mod crowding_support;
use crowding_support::*;
use thicket_engine::obstacles::FixedObstacles;
#[test]
fn rsa_reach() {
    for (edge, r) in [(40.0, 2.0), (80.0, 2.0)] {
        for phi in [0.34, 0.35, 0.36, 0.37, 0.38] {
            let text = format!("seed = 8\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge}, {edge}, {edge}]\n[[species]]\nname = \"t\"\nradius_nm = 0.1\ncount = 1\n[obstacles]\nplacement = \"random\"\nvolume_fraction = {phi}\nradius_nm = {r}\n[integrator]\ndt_s = 1e-9\nsteps = 1\n");
            let sc = scenario(&text);
            let t = std::time::Instant::now();
            match FixedObstacles::build(&sc) {
                Ok(o) => println!(
                    "RSA {edge} {phi}: ok {} in {:.2}s",
                    o.spheres.len(),
                    t.elapsed().as_secs_f64()
                ),
                Err(e) => println!(
                    "RSA {edge} {phi}: {} in {:.2}s",
                    e,
                    t.elapsed().as_secs_f64()
                ),
            }
        }
    }
}
