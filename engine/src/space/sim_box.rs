//! The simulation box: edges and periodicity, and folding a coordinate back
//! between walls.

/// A validated simulation box.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SimBox {
    /// Edge lengths, nm.
    pub edges_nm: [f64; 3],
    /// Periodic per axis.
    pub periodic: [bool; 3],
}

/// Specular reflection of a coordinate into [lo, hi].
#[inline(always)]
pub fn reflect(mut x: f64, lo: f64, hi: f64) -> f64 {
    // A step longer than the gap could need several bounces; loop until inside.
    loop {
        if x < lo {
            x = 2.0 * lo - x;
        } else if x > hi {
            x = 2.0 * hi - x;
        } else {
            return x;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reflect_folds_back_inside() {
        assert_eq!(reflect(-0.5, 0.0, 10.0), 0.5);
        assert_eq!(reflect(10.5, 0.0, 10.0), 9.5);
        assert_eq!(reflect(25.0, 0.0, 10.0), 5.0);
    }
}
