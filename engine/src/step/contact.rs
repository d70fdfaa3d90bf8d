//! The third piece of a step: the contact rule that accepts or rejects a
//! folded move. Fixed obstacles reject a move whose end point lies inside
//! one (grown by the particle's radius): move rejection, a Monte Carlo
//! Brownian dynamics scheme whose bias shrinks like √Δt (REFERENCES.md
//! "Numerics"). Mobile crowders are the crowd's business (`crowd`).

use crate::space::neighbors::Blocker;

/// Accepts or rejects the end point of a move.
pub trait Contact: Sync {
    /// What the rule remembers about one particle between its steps.
    type Memo: Copy;

    /// The memo of a particle at the open point `x`.
    fn memo(&self, x: &[f64; 3]) -> Self::Memo;

    /// True when a particle may end its move at `y`.
    fn accepts(&self, y: &[f64; 3], memo: &mut Self::Memo) -> bool;
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
