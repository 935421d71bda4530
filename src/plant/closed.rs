//! Many sub-steps at once. Between two events of the plate (a stop reached, a reversal, a
//! change of spring piece, rest) a sub-step of [`super::substep`] is an affine map of the
//! state `z = (x, v)`: with the spring force `a - k x` of the piece, the Coulomb force
//! `fc sign(v)` fixed by the direction of travel and the motor force fixed for the call,
//!
//! ```text
//! v' = (1 - h c) v - h k x + h f          f = motor + a - fc sign(v)
//! x' = x + h v' = (1 - h^2 k) x + h (1 - h c) v + h^2 f
//! ```
//!
//! so `z' = M z + f u` with `u = (h^2, h)`, and `n` sub-steps are `M^n z + f (I + M + ... +
//! M^(n-1)) u`. The powers are tabulated for `n = 2^j` and composed along the bits of `n`.
//!
//! The closed form is only taken when it is exact, i.e. when no event can have happened in
//! between. Where `M` has two distinct positive real eigenvalues, every component of the
//! deviation from the fixed point is `c1 l1^n + c2 l2^n`, which changes sign at most once; so
//! if the velocity has the same strict sign at both ends it had it throughout, the position
//! was monotone, and both ends inside the piece and off the stops put every position in
//! between there too. Otherwise (underdamped pieces, a reversal, a piece boundary crossed)
//! the caller falls back to sub-stepping. The result equals the sub-stepped one up to
//! rounding.

use super::{DETENT_BAND, PlantParams};

/// Affine map of `2^j` sub-steps: `z -> m z + f w`.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Block {
    m: [[f64; 2]; 2],
    w: [f64; 2],
}

impl Block {
    fn apply(&self, x: f64, v: f64, f: f64) -> (f64, f64) {
        (
            self.m[0][0] * x + self.m[0][1] * v + f * self.w[0],
            self.m[1][0] * x + self.m[1][1] * v + f * self.w[1],
        )
    }

    /// `self` twice: `m^2`, `(I + m) w`.
    fn doubled(&self) -> Block {
        let m = self.m;
        let mm = [
            [
                m[0][0] * m[0][0] + m[0][1] * m[1][0],
                m[0][0] * m[0][1] + m[0][1] * m[1][1],
            ],
            [
                m[1][0] * m[0][0] + m[1][1] * m[1][0],
                m[1][0] * m[0][1] + m[1][1] * m[1][1],
            ],
        ];
        let w = [
            self.w[0] + m[0][0] * self.w[0] + m[0][1] * self.w[1],
            self.w[1] + m[1][0] * self.w[0] + m[1][1] * self.w[1],
        ];
        Block { m: mm, w }
    }
}

/// Number of tabulated powers: up to `2^BLOCKS - 1` sub-steps in one closed-form jump.
const BLOCKS: usize = 24;

/// Where a piece holds, in the terms [`PlantParams::spring`] tests them.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Region {
    /// `x - default > DETENT_BAND`.
    Above,
    /// `x - default < -DETENT_BAND`.
    Below,
    /// Springs broken: everywhere.
    Free,
}

impl Region {
    fn holds(self, p: &PlantParams, x: f64) -> bool {
        match self {
            Region::Above => x - p.default > DETENT_BAND,
            Region::Below => x - p.default < -DETENT_BAND,
            Region::Free => true,
        }
    }
}

/// One affine piece of the spring: force `a - k x` over its region.
#[derive(Clone, Debug, PartialEq)]
struct Piece {
    region: Region,
    a: f64,
    blocks: Vec<Block>,
}

impl Piece {
    /// `None` when the piece's map has no two distinct positive real eigenvalues (the closed
    /// form could then hide a reversal).
    fn new(region: Region, a: f64, k: f64, c: f64, h: f64) -> Option<Piece> {
        let m = [[1.0 - h * h * k, h * (1.0 - h * c)], [-h * k, 1.0 - h * c]];
        let tr = m[0][0] + m[1][1];
        let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
        let disc = tr * tr - 4.0 * det;
        if !(disc.is_finite() && disc > 0.0 && det > 0.0 && tr > 0.0) {
            return None;
        }
        let mut b = Block { m, w: [h * h, h] };
        let mut blocks = Vec::with_capacity(BLOCKS);
        for _ in 0..BLOCKS {
            blocks.push(b);
            b = b.doubled();
        }
        Some(Piece { region, a, blocks })
    }
}

/// The closed-form tables of one plate.
#[derive(Clone, Debug, PartialEq)]
pub struct Closed {
    /// Above the detent band, below it, and with the springs broken (no spring force).
    above: Option<Piece>,
    below: Option<Piece>,
    free: Option<Piece>,
}

impl Closed {
    pub fn new(p: &PlantParams) -> Closed {
        let (k, d, pre, c, h) = (p.stiffness, p.default, p.preload, p.viscous, p.substep_s);
        Closed {
            // spring(x) = -(pre + k (x - d)) above, pre - k (x - d) below.
            above: Piece::new(Region::Above, k * d - pre, k, c, h),
            below: Piece::new(Region::Below, pre + k * d, k, c, h),
            free: Piece::new(Region::Free, 0.0, 0.0, c, h),
        }
    }

    /// `n` sub-steps from a moving plate in one jump, or `None` when an event may fall in
    /// between (see the module text).
    pub fn jump(
        &self,
        p: &PlantParams,
        x: f64,
        v: f64,
        motor: f64,
        spring_on: bool,
        n: u64,
    ) -> Option<(f64, f64)> {
        if v == 0.0 || n >= 1 << BLOCKS {
            return None;
        }
        let piece = if !spring_on {
            self.free.as_ref()?
        } else if x - p.default > DETENT_BAND {
            self.above.as_ref()?
        } else if x - p.default < -DETENT_BAND {
            self.below.as_ref()?
        } else {
            return None;
        };
        let f = motor + piece.a - p.coulomb.copysign(v);
        let (mut xn, mut vn) = (x, v);
        // The blocks of `n`'s set bits, lowest first (`n < 2^BLOCKS`, checked above).
        let mut bits = n;
        while bits != 0 {
            let b = &piece.blocks[bits.trailing_zeros() as usize];
            (xn, vn) = b.apply(xn, vn, f);
            bits &= bits - 1;
        }
        // Both ends strictly off the stops and inside the piece, the direction kept: by the
        // module's argument no event fell in between.
        let same_direction = vn != 0.0 && (vn > 0.0) == (v > 0.0);
        let ok = |y: f64| y > 0.0 && y < 100.0 && piece.region.holds(p, y);
        (same_direction && ok(x) && ok(xn)).then_some((xn, vn))
    }
}
