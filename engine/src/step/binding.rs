//! Reversible binding to fixed obstacles (`scenario::binding` states the
//! model): the layer test and the draws of one binding event, each from the
//! particle's own stream so that results do not depend on threads. The
//! step itself (`pipeline::advance_sticky`) holds a bound tracer in place.

use crate::base::rng::ParticleRng;
use crate::obstacles::FixedObstacles;
use crate::scenario::binding::BindingSpec;
use crate::space::neighbors::ObstacleGrid;
use crate::space::SimBox;
use crate::step::state::Tether;

/// One species' binding rule.
#[derive(Debug, Clone)]
pub struct Sticky {
    /// The obstacles grown by the tracer radius plus the layer: an open
    /// centre that this grid blocks lies in the binding layer.
    layer: ObstacleGrid,
    /// Binding probability at a step end in the layer, 1 − exp(−k_on Δt).
    p_on: f64,
    /// k_off, 1/s.
    off_rate_per_s: f64,
    /// Δt, s.
    dt_s: f64,
}

impl Sticky {
    /// The rule of a species of steric radius `radius_nm` among `obstacles`.
    pub fn new(
        spec: &BindingSpec,
        obstacles: &FixedObstacles,
        radius_nm: f64,
        sim_box: &SimBox,
        dt_s: f64,
    ) -> Self {
        Self {
            layer: ObstacleGrid::build(
                &obstacles.spheres,
                &obstacles.fibres,
                radius_nm + spec.layer_nm,
                sim_box,
            ),
            p_on: spec.p_on(dt_s),
            off_rate_per_s: spec.off_rate_per_s,
            dt_s,
        }
    }

    /// True when an open centre at `x` is within the layer of some obstacle.
    #[inline]
    pub fn in_layer(&self, x: &[f64; 3]) -> bool {
        self.layer.blocked(x)
    }

    /// A free centre in the layer at the end of step `now`: binds with
    /// probability p_on, for a dwell τ ~ exp(−k_off t), held until the first
    /// step end at or after τ (at least one step).
    #[inline]
    pub fn try_bind(&self, g: &mut ParticleRng, now: u64) -> Option<Tether> {
        if g.uniform() >= self.p_on {
            return None;
        }
        // 1 − u lies in (0, 1], so τ is finite.
        let dwell_s = -(1.0 - g.uniform()).ln() / self.off_rate_per_s;
        // Held ⌈τ/Δt⌉ steps (geometric with release probability 1 − exp(−k_off Δt)); capped far past any run.
        let held = (dwell_s / self.dt_s).ceil().clamp(1.0, 1e18) as u64;
        Some(Tether {
            since_step: now,
            until_step: now.saturating_add(held),
            dwell_s,
        })
    }
}
