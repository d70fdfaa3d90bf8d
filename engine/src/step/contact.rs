//! The third piece of a step: the contact rule that accepts or rejects a
//! folded move. `Reflect` (the default without a [geometry]) mirrors the
//! path at each surface it meets, a bias ∝ Δt; `Reject` refuses a move whose
//! end point lies inside an obstacle (grown by the particle's radius): move
//! rejection, a Monte Carlo Brownian dynamics scheme whose bias shrinks like
//! √Δt (REFERENCES.md "Numerics"). Mobile crowders are the crowd's business
//! (`crowd`).

use crate::base::rng::ParticleRng;
use crate::space::collisions::{billiard, Bounds};
use crate::space::neighbors::{Blocker, ObstacleGrid};
use crate::step::boundary::{Boundary, Moved};

/// Accepts or rejects the end point of a move.
pub trait Contact: Sync {
    /// What the rule remembers about one particle between its steps.
    type Memo: Copy;

    /// The memo of a particle at the open point `x`.
    fn memo(&self, x: &[f64; 3]) -> Self::Memo;

    /// True when a particle may end its move at `y`.
    fn accepts(&self, y: &[f64; 3], memo: &mut Self::Memo) -> bool;

    /// Where the move `d` from `x` (image `n`) ends, or `None` when it is
    /// refused. By default the boundary folds it and [`Contact::accepts`]
    /// decides; a rule that follows the path (reflection) replaces both.
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn settle<B: Boundary>(
        &self,
        b: &B,
        x: &[f64; 3],
        n: &[i32; 3],
        d: &[f64; 3],
        g: &mut ParticleRng,
        symmetric: bool,
        memo: &mut Self::Memo,
    ) -> Option<Moved<B::Events>> {
        let y = [x[0] + d[0], x[1] + d[1], x[2] + d[2]];
        let moved = b.fold(x, n, y, g, symmetric);
        self.accepts(&moved.at, memo).then_some(moved)
    }
}

/// No contacts: every move stands.
#[derive(Debug, Clone, Copy, Default)]
pub struct NoContact;

impl Contact for NoContact {
    type Memo = ();

    #[inline(always)]
    fn memo(&self, _x: &[f64; 3]) {}

    #[inline(always)]
    fn accepts(&self, _y: &[f64; 3], _memo: &mut ()) -> bool {
        true
    }
}

/// Rejection at fixed obstacles, asked of any [`Blocker`].
#[derive(Debug, Clone, Copy)]
pub struct Reject<'a, B: Blocker> {
    /// The obstacles as this species' centre sees them.
    pub blocker: &'a B,
}

/// A ball around `anchor` known to be open: moves that stay inside it need
/// no lookup. Same decisions as testing every move, only cheaper.
#[derive(Debug, Clone, Copy)]
pub struct OpenBall {
    anchor: [f64; 3],
    radius2: f64,
}

impl<B: Blocker> Contact for Reject<'_, B> {
    type Memo = OpenBall;

    #[inline(always)]
    fn memo(&self, x: &[f64; 3]) -> OpenBall {
        OpenBall {
            anchor: *x,
            radius2: -1.0,
        }
    }

    #[inline(always)]
    fn accepts(&self, y: &[f64; 3], ball: &mut OpenBall) -> bool {
        let d = [
            y[0] - ball.anchor[0],
            y[1] - ball.anchor[1],
            y[2] - ball.anchor[2],
        ];
        if d[0] * d[0] + d[1] * d[1] + d[2] * d[2] < ball.radius2 {
            return true;
        }
        let clear = self.blocker.clearance(y);
        if clear >= 0.0 {
            ball.anchor = *y;
            ball.radius2 = clear * clear;
        }
        clear >= 0.0
    }
}

/// Reflection at fixed obstacles and the box's walls: the move follows the
/// straight step and is mirrored at each surface it meets
/// (`space::collisions::billiard`), so its bias on D_eff shrinks like Δt
/// rather than √Δt (`[integrator] contact = "reflect"`). Only in a box
/// without a `[geometry]`, whose faces it folds itself.
#[derive(Debug, Clone, Copy)]
pub struct Reflect<'a> {
    /// The obstacles as this species' centre sees them.
    pub grid: &'a ObstacleGrid,
    /// The box as this species' centre sees it.
    pub bounds: Bounds,
}

impl Contact for Reflect<'_> {
    type Memo = OpenBall;

    #[inline(always)]
    fn memo(&self, x: &[f64; 3]) -> OpenBall {
        OpenBall {
            anchor: *x,
            radius2: -1.0,
        }
    }

    #[inline(always)]
    fn accepts(&self, _y: &[f64; 3], _ball: &mut OpenBall) -> bool {
        true
    }

    #[inline(always)]
    fn settle<B: Boundary>(
        &self,
        _b: &B,
        x: &[f64; 3],
        n: &[i32; 3],
        d: &[f64; 3],
        _g: &mut ParticleRng,
        _symmetric: bool,
        ball: &mut OpenBall,
    ) -> Option<Moved<B::Events>> {
        let bounds = &self.bounds;
        let mut y = [x[0] + d[0], x[1] + d[1], x[2] + d[2]];
        let e = [
            y[0] - ball.anchor[0],
            y[1] - ball.anchor[1],
            y[2] - ball.anchor[2],
        ];
        let inside_walls = (0..3).all(|k| {
            bounds.periodic[k] || (y[k] >= bounds.lower_nm[k] && y[k] <= bounds.upper_nm[k])
        });
        // Both ends in a convex open ball and inside the walls: the path meets nothing.
        let clear = inside_walls && e[0] * e[0] + e[1] * e[1] + e[2] * e[2] < ball.radius2;
        if !clear && inside_walls {
            // One lookup for an open path: the end point's open ball and the
            // open ball around the start (within the memo's) cover the segment
            // when their radii add up to more than its length.
            let (w, crossed) = bounds.wrap(&y);
            let c = self.grid.clearance(&w);
            let len = (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt();
            let start = if ball.radius2 > 0.0 {
                let a = [
                    x[0] - ball.anchor[0],
                    x[1] - ball.anchor[1],
                    x[2] - ball.anchor[2],
                ];
                (ball.radius2.sqrt() - (a[0] * a[0] + a[1] * a[1] + a[2] * a[2]).sqrt()).max(0.0)
            } else {
                0.0
            };
            if c > 0.0 && len < c + start {
                ball.anchor = w;
                ball.radius2 = c * c;
                return Some(Moved {
                    at: w,
                    image: [n[0] + crossed[0], n[1] + crossed[1], n[2] + crossed[2]],
                    events: B::Events::default(),
                });
            }
        }
        if !clear {
            y = billiard(x, d, bounds, self.grid).0;
        }
        let (w, crossed) = bounds.wrap(&y);
        if !clear {
            let c = self.grid.clearance(&w);
            ball.anchor = w;
            ball.radius2 = if c > 0.0 { c * c } else { -1.0 };
        } else if crossed != [0; 3] {
            // The anchor stays in the frame it was found in: a wrapped point needs a new one.
            ball.radius2 = -1.0;
        }
        Some(Moved {
            at: w,
            image: [n[0] + crossed[0], n[1] + crossed[1], n[2] + crossed[2]],
            events: B::Events::default(),
        })
    }
}
