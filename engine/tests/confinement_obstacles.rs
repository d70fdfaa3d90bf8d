//! Stepper combined with crowding: fixed obstacles inside a slit and a
//! pore, and mobile hard spheres between walls.
//!
//! - Slit with wall hydrodynamics and fixed spheres: the equilibrium density
//!   of ideal tracers is uniform over the space open to their centres
//!   (stationarity of the uniform density, an exact identity), so the height
//!   histogram follows the open-space profile of this very obstacle
//!   configuration, computed independently by Monte Carlo.
//! - Cylindrical pore filled with fibres aligned with its axis: axial motion
//!   is not hindered at all (translation invariance along z), so the axial
//!   D_eff equals D0; the transverse motion is the one the fibres and wall
//!   obstruct.
//! - Mobile hard spheres in a slit: the contact theorem for a hard wall,
//!   ρ(contact) = p/kT, with the bulk pressure from Carnahan–Starling.

mod confinement_support;

use confinement_support::*;
use std::path::Path;
use thicket_engine::base::rng::ParticleRng;
use thicket_engine::obstacles::spheres::FixedObstacles;
use thicket_engine::space::neighbors::ObstacleGrid;
use thicket_engine::step::{State, Stepper};
use thicket_engine::Scenario;

/// Pearson chi-square critical value, 19 degrees of freedom, upper tail
/// probability 0.001 (standard chi-square table, e.g. the NIST/SEMATECH
/// e-Handbook of Statistical Methods, table 1.3.6.7.4).
const CHI2_19_P001: f64 = 43.82;

fn parse(text: &str) -> Scenario {
    Scenario::from_text(text, Path::new("test.toml"), &[])
        .unwrap_or_else(|e| panic!("test scenario is valid: {e}"))
}

/// The kernels of a confined scenario among its fixed obstacles, as `run` builds them.
fn confined_among_obstacles(s: &Scenario) -> (Stepper, FixedObstacles) {
    let obstacles = FixedObstacles::build(s).expect("placement");
    let c = Stepper::new(s, &obstacles);
    (c, obstacles)
}

#[test]
fn tracers_among_obstacles_in_a_slit_fill_the_open_space_uniformly() {
    // Tracer a = 1 nm, gap 12 nm, spheres of 2 nm at φ = 0.15 of the slit, wall hydrodynamics on.
    let (a, w, bins, count) = (1.0, 12.0, 20usize, 10_000usize);
    let sigma = 0.05;
    // About three relaxation times across the gap, (W − 2a)²/(π² D0) ≈ 1e-7 s, at D⊥ ≈ D0/2.
    let steps = 40_000u64;
    let text = format!(
        "seed = 31\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [40.0, 40.0, {w}]\n\
         [[species]]\nname = \"tracer\"\nradius_nm = {a}\ncount = {count}\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         [integrator]\ndt_s = {:e}\nsteps = {steps}\n[output]\nrecord_every_steps = {steps}\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.15\nradius_nm = 2.0\n\
         [geometry]\nkind = \"slit\"\nwall_hydrodynamics = true\n",
        dt_for_sigma(sigma)
    );
    let s = parse(&text);
    let (mut c, obstacles) = confined_among_obstacles(&s);
    assert!(obstacles.spheres.len() > 50, "the slit holds obstacles");
    let mut state = c.initial_state(&s).unwrap();
    on_threads(2, || advance(&mut c, &mut state, steps, 1000));

    let grid = ObstacleGrid::build(&obstacles.spheres, &obstacles.fibres, a, &s.sim_box);
    let bin_of = |z: f64| (((z - a) / (w - 2.0 * a) * bins as f64) as usize).min(bins - 1);
    let mut histogram = vec![0u64; bins];
    for p in &state.positions {
        assert!(
            !grid.blocked(p),
            "a tracer centre inside an obstacle at {p:?}"
        );
        assert!(
            p[2] >= a && p[2] <= w - a,
            "a centre left the slit: z = {}",
            p[2]
        );
        histogram[bin_of(p[2])] += 1;
    }
    // The open volume per height bin of this configuration: uniform points, from a stream no particle uses.
    let mut rng = ParticleRng::for_particle(97, u64::MAX - 7);
    let mut open = vec![0u64; bins];
    for _ in 0..4_000_000 {
        let p = [
            rng.uniform() * 40.0,
            rng.uniform() * 40.0,
            a + rng.uniform() * (w - 2.0 * a),
        ];
        if !grid.blocked(&p) {
            open[bin_of(p[2])] += 1;
        }
    }
    let total_open: u64 = open.iter().sum();
    let chi2: f64 = histogram
        .iter()
        .zip(&open)
        .map(|(&n, &o)| {
            let expected = count as f64 * o as f64 / total_open as f64;
            (n as f64 - expected).powi(2) / expected
        })
        .sum();
    // The same counts against a flat profile: the obstacles' layering at the walls shows.
    let chi2_flat = chi_square_flat(&histogram);
    eprintln!("chi-square against the open-space profile {chi2:.1}, against flat {chi2_flat:.1} (19 dof); bins {histogram:?}; open {open:?}");
    assert!(
        chi2 < CHI2_19_P001,
        "density does not follow the open space: chi-square {chi2:.1} ≥ {CHI2_19_P001}"
    );
    assert!(
        chi2_flat > CHI2_19_P001,
        "the open-space profile is indistinguishable from flat here ({chi2_flat:.1}), so the test above proves nothing"
    );
}

#[test]
fn axial_diffusion_in_a_pore_of_aligned_fibres_is_free() {
    // Pore radius 20 nm, tracer 0.5 nm, fibres of radius 1 nm along z at φ = 0.1 of the box.
    let (a, count, windows, window) = (0.5, 20_000usize, 10u64, 600u64);
    let sigma = 0.05;
    let text = format!(
        "seed = 37\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [40.0, 40.0, 40.0]\n\
         [[species]]\nname = \"tracer\"\nradius_nm = {a}\ncount = {count}\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         [integrator]\ndt_s = {:e}\nsteps = {}\n[output]\nrecord_every_steps = {}\n\
         [fibres]\nradius_nm = 1.0\norientation = \"aligned\"\naxis = \"z\"\nvolume_fraction = 0.1\n\
         [geometry]\nkind = \"cylinder\"\npore_radius_nm = 20.0\n",
        dt_for_sigma(sigma),
        windows * window,
        windows * window
    );
    let s = parse(&text);
    let (mut c, obstacles) = confined_among_obstacles(&s);
    assert!(obstacles.fibres.len() > 10, "the pore holds fibres");
    let grid = ObstacleGrid::build(&obstacles.spheres, &obstacles.fibres, a, &s.sim_box);
    let mut state = c.initial_state(&s).unwrap();
    let dt = s.dt_s;
    // Per window and particle, Δz²/(2t) and the transverse (Δx² + Δy²)/(4t), nm²/s.
    let mut axial = Vec::new();
    let mut transverse = Vec::new();
    on_threads(2, || {
        for _ in 0..windows {
            let before: State = state.clone();
            advance(&mut c, &mut state, window, 200);
            let t = window as f64 * dt;
            for i in 0..count {
                let (p0, p1) = (
                    before.unwrapped(i, &s.sim_box),
                    state.unwrapped(i, &s.sim_box),
                );
                axial.push((p1[2] - p0[2]).powi(2) / (2.0 * t));
                transverse.push(((p1[0] - p0[0]).powi(2) + (p1[1] - p0[1]).powi(2)) / (4.0 * t));
            }
        }
    });
    for p in &state.positions {
        assert!(!grid.blocked(p), "a tracer centre inside a fibre at {p:?}");
    }
    // Windows of free axial motion are independent, so the plain standard error applies.
    let (d_axial, se) = mean_se(&axial);
    let (d_transverse, se_transverse) = mean_se(&transverse);
    let ratio = d_axial / D0_NM2_PER_S;
    let ratio_se = se / D0_NM2_PER_S;
    eprintln!(
        "axial D/D0 = {ratio:.4} ± {ratio_se:.4}, transverse short-window D/D0 = {:.4}",
        d_transverse / D0_NM2_PER_S
    );
    // Rejected moves (end point in a fibre) also undo their z part: a bias of about
    // (S/V)·σ/√(2π) ≈ 0.3 % here, inside the 2 % tolerance and well above 4 SE.
    assert!(
        (ratio - 1.0).abs() < 0.02,
        "axial D/D0 = {ratio:.4} ± {ratio_se:.4}, not within 2 % of 1"
    );
    assert!(
        ratio_se < 0.005,
        "too few samples to resolve 2 % ({ratio_se})"
    );
    assert!(
        d_transverse + 4.0 * (se_transverse + se) < d_axial,
        "the fibres and wall should slow transverse motion: {d_transverse} ± {se_transverse} vs {d_axial} ± {se}"
    );
}

/// Carnahan–Starling compressibility factor p/(ρkT) = (1 + φ + φ² − φ³)/(1 − φ)³
/// (Carnahan & Starling 1969; REFERENCES.md gives its contact value).
fn carnahan_starling_z(phi: f64) -> f64 {
    (1.0 + phi + phi * phi - phi.powi(3)) / (1.0 - phi).powi(3)
}

#[test]
fn hard_spheres_at_a_wall_obey_the_contact_theorem() {
    // Spheres of radius 1 nm in a 24 nm slit (12 diameters), 1485 of them: φ ≈ 0.2 in the middle.
    let (a, w, l, count) = (1.0, 24.0, 36.0, 1485usize);
    let sigma = 0.04;
    let (equilibrate, frames, every) = (20_000u64, 6_000u64, 20u64);
    let text = format!(
        "seed = 41\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{l}, {l}, {w}]\n\
         [[species]]\nname = \"sphere\"\nrole = \"crowder\"\nradius_nm = {a}\ncount = {count}\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         [integrator]\ndt_s = {:e}\nsteps = {}\n[output]\nrecord_every_steps = {every}\n\
         [geometry]\nkind = \"slit\"\n",
        dt_for_sigma(sigma),
        equilibrate + frames * every
    );
    let s = parse(&text);
    let mut dynamics = Stepper::new(&s, &FixedObstacles::default());
    let mut state = dynamics.initial_state(&s).unwrap();
    dynamics.advance(&mut state, equilibrate);
    // Gap h between a centre's contact position and the nearer wall, binned near contact;
    // the middle 8 nm (four diameters from either wall) gives the bulk density.
    let (bin, near_bins, batches) = (0.04, 8usize, 20usize);
    let per_batch = frames as usize / batches;
    let mut contact = Vec::new();
    let mut bulk = Vec::new();
    let mut near = vec![0u64; near_bins];
    let mut middle = 0u64;
    for f in 0..frames as usize {
        dynamics.advance(&mut state, every);
        for p in &state.positions {
            assert!(p[2] >= a && p[2] <= w - a, "a centre left the slit: {p:?}");
            let h = (p[2] - a).min(w - a - p[2]);
            let k = (h / bin) as usize;
            if k < near_bins {
                near[k] += 1;
            }
            if (p[2] - 0.5 * w).abs() < 4.0 {
                middle += 1;
            }
        }
        if (f + 1) % per_batch == 0 {
            // Densities per nm³: both walls, area l², this batch's frames.
            let norm = per_batch as f64 * 2.0 * l * l * bin;
            let rho: Vec<f64> = near.iter().map(|&n| n as f64 / norm).collect();
            contact.push(extrapolate_to_zero(&rho, bin));
            bulk.push(middle as f64 / (per_batch as f64 * l * l * 8.0));
            near.iter_mut().for_each(|n| *n = 0);
            middle = 0;
        }
    }
    let ratios: Vec<f64> = contact
        .iter()
        .zip(&bulk)
        .map(|(&c, &rho)| {
            let phi = rho * 4.0 / 3.0 * std::f64::consts::PI * a.powi(3);
            c / (rho * carnahan_starling_z(phi))
        })
        .collect();
    let (ratio, se) = mean_se(&ratios);
    let (rho_b, _) = mean_se(&bulk);
    let phi_b = rho_b * 4.0 / 3.0 * std::f64::consts::PI * a.powi(3);
    eprintln!(
        "bulk φ = {phi_b:.4}; contact density over p/kT (Carnahan–Starling) = {ratio:.4} ± {se:.4} ({batches} batches)"
    );
    assert!(
        (0.17..0.23).contains(&phi_b),
        "the middle of the slit is not near φ = 0.2: {phi_b}"
    );
    // Contact theorem for a hard planar wall, ρ(contact) = p/kT (Henderson, Blum & Lebowitz 1979, from memory).
    assert!(
        (ratio - 1.0).abs() < 4.0 * se,
        "contact density / (p/kT) = {ratio:.4} ± {se:.4}, not 1 within 4 SE"
    );
    assert!(se < 0.012, "too noisy to test the theorem: SE {se}");
}

/// Value at h = 0 of the least-squares quadratic through densities at the bin centres.
fn extrapolate_to_zero(rho: &[f64], bin: f64) -> f64 {
    // Normal equations of y = c0 + c1 h + c2 h², solved by Cramer's rule.
    let mut m = [[0.0f64; 3]; 3];
    let mut v = [0.0f64; 3];
    for (k, &y) in rho.iter().enumerate() {
        let h = (k as f64 + 0.5) * bin;
        let pow = [1.0, h, h * h];
        for r in 0..3 {
            v[r] += pow[r] * y;
            for c in 0..3 {
                m[r][c] += pow[r] * pow[c];
            }
        }
    }
    let det = |m: &[[f64; 3]; 3]| {
        m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
            - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
            + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
    };
    let mut m0 = m;
    for r in 0..3 {
        m0[r][0] = v[r];
    }
    det(&m0) / det(&m)
}

#[test]
fn crowders_stay_inside_a_cylindrical_pore_without_overlaps() {
    let (a, r) = (1.0, 8.0);
    let text = format!(
        "seed = 43\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [16.0, 16.0, 40.0]\n\
         [[species]]\nname = \"sphere\"\nrole = \"crowder\"\nradius_nm = {a}\ncount = 600\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         [integrator]\ndt_s = {:e}\nsteps = 3000\n[geometry]\nkind = \"cylinder\"\npore_radius_nm = {r}\n",
        dt_for_sigma(0.05)
    );
    let s = parse(&text);
    let mut dynamics = Stepper::new(&s, &FixedObstacles::default());
    let mut state = dynamics.initial_state(&s).unwrap();
    let inside = |state: &State| {
        state
            .positions
            .iter()
            .map(|p| (p[0] - 8.0).hypot(p[1] - 8.0))
            .fold(0.0, f64::max)
    };
    assert!(inside(&state) <= r - a, "placed outside the pore");
    dynamics.advance(&mut state, 3000);
    let widest = inside(&state);
    assert!(
        widest <= r - a,
        "a centre {widest} nm off the axis, beyond r − a = {}",
        r - a
    );
    // The pore holds φ = 600·(4/3)π a³ / (π r² L) ≈ 0.31 of its volume: contacts are frequent.
    let crowd = dynamics.crowd().expect("a crowd");
    let overlap = thicket_engine::step::crowd::find_overlap_brute_force(
        &state.positions,
        crowd.radii_nm(),
        crowd.crowders(),
        &s.sim_box,
        1e-12,
    );
    assert_eq!(overlap, None, "overlapping spheres in the pore");
    assert!(
        crowd.stats.accepted < crowd.stats.proposed,
        "no move was ever rejected"
    );
}

#[test]
fn obstacles_that_cannot_fit_the_pore_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let base = |obstacles: &str, geometry: &str| {
        format!(
            "seed = 3\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [20.0, 20.0, 40.0]\n\
             [[species]]\nname = \"tracer\"\nradius_nm = 0.5\ncount = 10\n\
             [integrator]\ndt_s = 1e-10\nsteps = 100\n{obstacles}\n[geometry]\n{geometry}\n"
        )
    };
    let cylinder = "kind = \"cylinder\"\npore_radius_nm = 10.0";
    let build = |text: &str| -> String {
        let s = Scenario::from_text(text, &dir.path().join("scenario.toml"), &[])
            .unwrap_or_else(|e| panic!("scenario is valid: {e}"));
        FixedObstacles::build(&s).unwrap_err().to_string()
    };
    // A CSV sphere crossing the pore wall: the file, the line and the pore are named.
    std::fs::write(
        dir.path().join("beads.csv"),
        "x_nm,y_nm,z_nm,radius_nm\n10.0,10.0,5.0,2.0\n16.0,16.0,20.0,2.0\n",
    )
    .unwrap();
    let err = build(&base(
        "[obstacles]\nplacement = \"file\"\nfile = \"beads.csv\"",
        cylinder,
    ));
    assert!(
        err.contains("beads.csv")
            && err.contains("line 3")
            && err.contains("wholly inside the pore"),
        "{err}"
    );
    // A lattice cannot follow a curved wall.
    let err = build(&base(
        "[obstacles]\nplacement = \"simple_cubic\"\nvolume_fraction = 0.1\nradius_nm = 1.0",
        cylinder,
    ));
    assert!(err.contains("lattice") && err.contains("the pore"), "{err}");
    // Random addition in the pore stops with the fraction reached, of the pore.
    let err = build(&base(
        "[obstacles]\nplacement = \"random\"\nvolume_fraction = 0.45\nradius_nm = 2.0",
        cylinder,
    ));
    assert!(
        err.contains("reached φ =") && err.contains("of the pore"),
        "{err}"
    );
    // Overlapping obstacles larger than the pore find no place in it.
    let err = build(&base(
        "[obstacles]\nplacement = \"poisson\"\ncount = 3\nradius_nm = 9.9",
        "kind = \"cylinder\"\npore_radius_nm = 9.5",
    ));
    assert!(err.contains("wholly inside the pore"), "{err}");
}

#[test]
fn obstacles_fill_the_pore_at_the_fraction_asked_for() {
    // φ is relative to the pore volume π r² L, and every sphere lies wholly inside the pore.
    let text = "seed = 5\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [40.0, 40.0, 80.0]\n\
         [[species]]\nname = \"tracer\"\nradius_nm = 0.5\ncount = 10\n\
         [integrator]\ndt_s = 1e-10\nsteps = 100\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.25\nradius_nm = 2.0\n\
         [geometry]\nkind = \"cylinder\"\npore_radius_nm = 20.0\n";
    let s = parse(text);
    let o = FixedObstacles::build(&s).unwrap();
    let pore = std::f64::consts::PI * 20.0f64.powi(2) * 80.0;
    let v: f64 = o
        .spheres
        .radii_nm
        .iter()
        .map(|b| 4.0 / 3.0 * std::f64::consts::PI * b.powi(3))
        .sum();
    // The count is rounded to the nearest whole sphere: within half a sphere's volume.
    let half_sphere = 0.5 * 4.0 / 3.0 * std::f64::consts::PI * 8.0 / pore;
    assert!(
        (v / pore - 0.25).abs() <= half_sphere,
        "φ of the pore = {}",
        v / pore
    );
    for (c, b) in o.spheres.centres_nm.iter().zip(&o.spheres.radii_nm) {
        let off_axis = (c[0] - 20.0).hypot(c[1] - 20.0);
        assert!(
            off_axis + b <= 20.0,
            "a sphere crosses the pore wall: {c:?}"
        );
    }
    // Membranes: obstacles go in the pores only, so the reservoirs stay clear.
    let text = "seed = 5\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [40.0, 40.0, 120.0]\n\
         [[species]]\nname = \"tracer\"\nradius_nm = 0.5\ncount = 10\n\
         [integrator]\ndt_s = 1e-10\nsteps = 100\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.2\nradius_nm = 1.5\n\
         [geometry]\nkind = \"membrane\"\nthickness_nm = 40.0\npore_radius_nm = 8.0\npores_x = 2\npores_y = 2\n";
    let s = parse(text);
    let o = FixedObstacles::build(&s).unwrap();
    let Some(g) = &s.geometry else { unreachable!() };
    let thicket_engine::space::shape::Shape::Membrane(m) = &g.shape else {
        panic!("a membrane")
    };
    assert!(!o.spheres.is_empty());
    for (c, b) in o.spheres.centres_nm.iter().zip(&o.spheres.radii_nm) {
        assert!(
            c[2] - b >= m.z_lo_nm && c[2] + b <= m.z_hi_nm && m.in_pore(c),
            "a sphere outside the pores: {c:?}"
        );
    }
}
