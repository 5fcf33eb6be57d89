//! Quantum channels as Kraus sets and isometries.
//!
//! A [`KrausChannel`] maps operators on a `d_in`-dimensional space to a `d_out`-dimensional
//! one; its constructor checks completeness `Σ K†K = 1` within an explicit tolerance (the
//! default is [`crate::numeric::linalg::DEFAULT_TOL`] = 1e-9) and refuses shapes or entries that do not
//! fit. Random isometries and Kraus sets for property tests live here too.

use crate::error::{Error, ErrorKind, Result};
use crate::numeric::linalg::{c, identity, max_abs_diff, orthonormal_columns, CMat, Tolerance, C64};
use rand::Rng;
use rand_distr::StandardNormal;

/// A completely positive trace-preserving map given by Kraus operators.
#[derive(Clone, Debug, PartialEq)]
pub struct KrausChannel {
    ops: Vec<CMat>,
    d_in: usize,
    d_out: usize,
}

impl KrausChannel {
    /// Validates shapes, finiteness and completeness (`|Σ K†K − 1|` entrywise within `tol`).
    /// Errors name the operator (0-based index) and entry at fault.
    pub fn new(ops: Vec<CMat>, tol: Tolerance) -> Result<Self> {
        let first = ops.first().ok_or_else(|| Error::input_key("operators", "a channel needs at least one Kraus operator"))?;
        let (d_out, d_in) = first.shape();
        if d_in == 0 || d_out == 0 {
            return Err(Error::input_key("operators[0]", "Kraus operator has an empty shape"));
        }
        for (k, op) in ops.iter().enumerate() {
            if op.shape() != (d_out, d_in) {
                return Err(Error::input_key(
                    format!("operators[{k}]"),
                    format!("shape {}×{} differs from operator 0's {}×{}", op.nrows(), op.ncols(), d_out, d_in),
                ));
            }
            for i in 0..d_out {
                for j in 0..d_in {
                    let z = op[(i, j)];
                    if !z.re.is_finite() || !z.im.is_finite() {
                        return Err(Error::input_key(format!("operators[{k}][{i}][{j}]"), "entry is not a finite number"));
                    }
                }
            }
        }
        let mut sum = CMat::zeros(d_in, d_in);
        for op in &ops {
            sum += op.adjoint() * op;
        }
        let defect = max_abs_diff(&sum, &identity(d_in));
        if defect > tol.abs {
            return Err(Error::new(
                ErrorKind::NotPhysical,
                format!(
                    "Kraus operators are not complete: sum of K†K differs from the identity by {defect:.3e} (tolerance {:.1e})",
                    tol.abs
                ),
            )
            .with_key("operators"));
        }
        Ok(KrausChannel { ops, d_in, d_out })
    }

    /// A channel with a single Kraus operator (an isometry), validated like [`Self::new`].
    pub fn isometry(v: CMat, tol: Tolerance) -> Result<Self> {
        Self::new(vec![v], tol)
    }

    /// The Kraus operators.
    pub fn operators(&self) -> &[CMat] {
        &self.ops
    }
    /// Input dimension.
    pub fn d_in(&self) -> usize {
        self.d_in
    }
    /// Output dimension.
    pub fn d_out(&self) -> usize {
        self.d_out
    }

    /// Applies the channel: `Σ K ρ K†`.
    #[track_caller]
    pub fn apply(&self, rho: &CMat) -> CMat {
        assert_eq!(rho.nrows(), self.d_in, "channel input dimension mismatch");
        let mut out = CMat::zeros(self.d_out, self.d_out);
        for k in &self.ops {
            out += k * rho * k.adjoint();
        }
        out
    }

    /// Largest entry of `|Σ K†K − 1|`.
    pub fn completeness_defect(&self) -> f64 {
        let mut sum = CMat::zeros(self.d_in, self.d_in);
        for op in &self.ops {
            sum += op.adjoint() * op;
        }
        max_abs_diff(&sum, &identity(self.d_in))
    }

    /// A Haar-random isometry from `C^d_in` to `C^d_out` (`d_out ≥ d_in`): the first `d_in`
    /// columns of a Haar unitary, obtained by phase-fixed QR of a complex Gaussian matrix.
    #[track_caller]
    pub fn random_isometry(d_in: usize, d_out: usize, rng: &mut impl Rng) -> CMat {
        assert!(d_out >= d_in, "an isometry needs d_out >= d_in");
        let g = CMat::from_fn(d_out, d_in, |_, _| c(rng.sample(StandardNormal), rng.sample(StandardNormal)));
        orthonormal_columns(&g)
    }

    /// A random channel with `n_ops` Kraus operators: a Haar isometry from `C^d_in` to
    /// `C^(n_ops·d_out)` cut into `n_ops` blocks of `d_out` rows.
    pub fn random(d_in: usize, d_out: usize, n_ops: usize, rng: &mut impl Rng) -> Self {
        let v = Self::random_isometry(d_in, d_out * n_ops, rng);
        let ops = (0..n_ops).map(|k| v.rows(k * d_out, d_out).into_owned()).collect();
        KrausChannel { ops, d_in, d_out }
    }

    /// A near-identity interaction: Eve's probe starts in |0> of C^d_e and interacts with the
    /// signal by `U = exp(−i t H)`, `H` a random Hermitian matrix on C² ⊗ C^d_e (GUE-like,
    /// normalised to unit operator norm), so `t` bounds the interaction strength. Returns the
    /// (2·d_e) × 2 isometry `U (1 ⊗ |0>)` in tensor order signal first.
    pub fn random_interaction(d_e: usize, t: f64, rng: &mut impl Rng) -> CMat {
        let n = 2 * d_e;
        let g = CMat::from_fn(n, n, |_, _| c(rng.sample(StandardNormal), rng.sample(StandardNormal)));
        let h = (&g + g.adjoint()) * c(0.5, 0.0);
        let (vals, vecs) = crate::numeric::linalg::hermitian_eigen(&h);
        // A zero generator (probability zero in the Gaussian draw) must not divide by zero.
        let norm = vals.iter().fold(0.0_f64, |m, v| m.max(v.abs())).max(f64::MIN_POSITIVE);
        let phases =
            CMat::from_diagonal(&crate::numeric::linalg::CVec::from_iterator(n, vals.iter().map(|v| C64::from_polar(1.0, -t * v / norm))));
        let u = &vecs * phases * vecs.adjoint();
        // Columns of U for inputs |b>|0>: column index b·d_e.
        CMat::from_fn(n, 2, |r, b| u[(r, b * d_e)])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numeric::linalg::trace_re;
    use crate::quantum::state::DensityMatrix;
    use rand::SeedableRng;

    #[test]
    fn random_channels_are_complete_and_trace_preserving() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1);
        for n_ops in 1..4 {
            let ch = KrausChannel::random(2, 6, n_ops, &mut rng);
            assert!(ch.completeness_defect() < 1e-12);
            let rho = DensityMatrix::random_hilbert_schmidt(2, &mut rng);
            let out = ch.apply(rho.matrix());
            assert!((trace_re(&out) - 1.0).abs() < 1e-12);
            assert!(DensityMatrix::new(out, Tolerance::default()).is_ok());
        }
    }

    #[test]
    fn incomplete_kraus_set_is_rejected() {
        let k = identity(2) * c(0.9, 0.0);
        let err = KrausChannel::new(vec![k], Tolerance::default()).unwrap_err();
        assert!(err.to_string().contains("not complete"), "{err}");
        let bad_shape = KrausChannel::new(vec![identity(2), CMat::zeros(3, 2)], Tolerance::default()).unwrap_err();
        assert!(bad_shape.to_string().contains("operators[1]"), "{bad_shape}");
    }
}
