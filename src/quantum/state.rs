//! Kets and validated density matrices.
//!
//! A [`DensityMatrix`] is Hermitian, positive semidefinite and of unit trace within a
//! stated tolerance, or it does not exist: there is no silent renormalising or clamping.
//! Random states for tests and property checks take an explicit `&mut impl Rng`.

use crate::error::{Error, ErrorKind, Result};
use crate::numeric::linalg::{c, hermitian_eigenvalues, hermiticity_defect, outer, trace_re, CMat, CVec, Tolerance};
use rand::Rng;
use rand_distr::StandardNormal;

/// A normalised pure state.
#[derive(Clone, Debug, PartialEq)]
pub struct Ket(CVec);

impl Ket {
    /// Validates that `v` has unit norm within `tol`.
    pub fn new(v: CVec, tol: Tolerance) -> Result<Self> {
        let n = v.norm();
        if !n.is_finite() || (n - 1.0).abs() > tol.abs {
            return Err(Error::new(ErrorKind::NotPhysical, format!("ket has norm {n}, expected 1 within {}", tol.abs)));
        }
        Ok(Ket(v))
    }
    /// Normalises a non-zero vector.
    #[track_caller]
    pub fn normalized(v: CVec) -> Self {
        let n = v.norm();
        assert!(n > 0.0 && n.is_finite(), "cannot normalise a zero or non-finite vector");
        Ket(v / c(n, 0.0))
    }
    /// The amplitudes.
    pub fn vector(&self) -> &CVec {
        &self.0
    }
    /// Dimension of the space.
    pub fn dim(&self) -> usize {
        self.0.len()
    }
    /// The projector `|ψ><ψ|` as a density matrix.
    pub fn density(&self) -> DensityMatrix {
        DensityMatrix(outer(&self.0, &self.0))
    }
    /// A Haar-random ket of dimension `d`.
    pub fn haar(d: usize, rng: &mut impl Rng) -> Self {
        let v = CVec::from_fn(d, |_, _| c(rng.sample(StandardNormal), rng.sample(StandardNormal)));
        Ket::normalized(v)
    }
}

/// A validated density matrix.
#[derive(Clone, Debug, PartialEq)]
pub struct DensityMatrix(CMat);

impl DensityMatrix {
    /// Validates Hermiticity, unit trace and positivity, each within `tol`.
    pub fn new(m: CMat, tol: Tolerance) -> Result<Self> {
        if m.nrows() != m.ncols() || m.nrows() == 0 {
            return Err(Error::new(
                ErrorKind::NotPhysical,
                format!("density matrix must be square and non-empty, got {}×{}", m.nrows(), m.ncols()),
            ));
        }
        if m.iter().any(|z| !z.re.is_finite() || !z.im.is_finite()) {
            return Err(Error::new(ErrorKind::NotPhysical, "density matrix has a non-finite entry"));
        }
        let h = hermiticity_defect(&m);
        if h > tol.abs {
            return Err(Error::new(
                ErrorKind::NotPhysical,
                format!("matrix is not Hermitian: |m - m†| reaches {h:.3e} (tolerance {})", tol.abs),
            ));
        }
        let t = trace_re(&m);
        if (t - 1.0).abs() > tol.abs {
            return Err(Error::new(ErrorKind::NotPhysical, format!("trace is {t}, expected 1 within {}", tol.abs)));
        }
        let lmin = hermitian_eigenvalues(&m)[0];
        if lmin < -tol.abs {
            return Err(Error::new(ErrorKind::NotPhysical, format!("matrix is not positive: smallest eigenvalue {lmin:.3e}")));
        }
        Ok(DensityMatrix(m))
    }
    /// The matrix.
    pub fn matrix(&self) -> &CMat {
        &self.0
    }
    /// Dimension.
    pub fn dim(&self) -> usize {
        self.0.nrows()
    }
    /// Maximally mixed state of dimension `d`.
    pub fn maximally_mixed(d: usize) -> Self {
        DensityMatrix(CMat::identity(d, d) * c(1.0 / d as f64, 0.0))
    }
    /// A random mixed state of dimension `d` drawn from the Hilbert–Schmidt measure
    /// (`G G† / Tr G G†` with `G` complex Gaussian, Życzkowski–Sommers 2001).
    pub fn random_hilbert_schmidt(d: usize, rng: &mut impl Rng) -> Self {
        let g = CMat::from_fn(d, d, |_, _| c(rng.sample(StandardNormal), rng.sample(StandardNormal)));
        let m = &g * g.adjoint();
        let t = trace_re(&m);
        DensityMatrix(m / c(t, 0.0))
    }
    /// Tensor product.
    pub fn tensor(&self, other: &DensityMatrix) -> Self {
        DensityMatrix(crate::numeric::linalg::kron(&self.0, &other.0))
    }
    /// Partial trace keeping the subsystems `keep` of a system with dimensions `dims`.
    pub fn partial_trace(&self, dims: &[usize], keep: &[usize]) -> Self {
        DensityMatrix(crate::numeric::linalg::partial_trace(&self.0, dims, keep))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn rejects_non_physical_matrices() {
        let tol = Tolerance::default();
        let mut m = CMat::identity(2, 2) * c(0.5, 0.0);
        assert!(DensityMatrix::new(m.clone(), tol).is_ok());
        m[(0, 1)] = c(0.1, 0.0);
        assert!(DensityMatrix::new(m.clone(), tol).is_err(), "non-Hermitian accepted");
        let neg = CMat::from_diagonal(&CVec::from_vec(vec![c(1.2, 0.0), c(-0.2, 0.0)]));
        assert!(DensityMatrix::new(neg, tol).is_err(), "negative eigenvalue accepted");
        let big = CMat::identity(2, 2);
        assert!(DensityMatrix::new(big, tol).is_err(), "trace 2 accepted");
    }

    #[test]
    fn random_states_are_valid() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        for d in 1..6 {
            let rho = DensityMatrix::random_hilbert_schmidt(d, &mut rng);
            assert!(DensityMatrix::new(rho.matrix().clone(), Tolerance::default()).is_ok());
            let k = Ket::haar(d, &mut rng);
            assert!(Ket::new(k.vector().clone(), Tolerance::default()).is_ok());
        }
    }
}
