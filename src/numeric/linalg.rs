//! Linear algebra kernel: the only module that names the matrix crate.
//!
//! Owns the complex matrix aliases, the tolerance type, tensor products, partial traces
//! over any bipartition of a multi-party system, Hermitian eigen-solves and the matrix
//! functions built on them. It knows nothing about physics; `state`, `channel` and
//! `measures` build on it. Dimension mismatches are programmer errors and panic with
//! `#[track_caller]`; nothing here returns data-dependent errors.

use nalgebra::{DMatrix, DVector};
pub use num_complex::Complex64 as C64;

/// Dense complex matrix (row-major semantics as in nalgebra: `m[(row, col)]`).
pub type CMat = DMatrix<C64>;
/// Dense complex column vector.
pub type CVec = DVector<C64>;
/// Dense real matrix.
pub type RMat = DMatrix<f64>;
/// Dense real column vector.
pub type RVec = DVector<f64>;

/// Default absolute tolerance for physical checks (Hermiticity, trace, positivity,
/// Kraus completeness): 1e-9.
pub const DEFAULT_TOL: f64 = 1e-9;

/// An absolute tolerance, passed explicitly wherever a check or a cut-off is made.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tolerance {
    /// Largest accepted absolute deviation.
    pub abs: f64,
}

impl Default for Tolerance {
    fn default() -> Self {
        Tolerance { abs: DEFAULT_TOL }
    }
}

impl Tolerance {
    /// A tolerance of `abs`.
    pub fn new(abs: f64) -> Self {
        Tolerance { abs }
    }
}

/// Complex number shorthand.
#[inline]
pub fn c(re: f64, im: f64) -> C64 {
    C64::new(re, im)
}

/// Tensor (Kronecker) product `a ⊗ b`.
pub fn kron(a: &CMat, b: &CMat) -> CMat {
    a.kronecker(b)
}

/// Tensor product of two kets.
pub fn kron_vec(a: &CVec, b: &CVec) -> CVec {
    a.kronecker(b)
}

/// Outer product `|a><b|`.
pub fn outer(a: &CVec, b: &CVec) -> CMat {
    a * b.adjoint()
}

/// Largest absolute entry of `m − m†`.
pub fn hermiticity_defect(m: &CMat) -> f64 {
    assert_square(m);
    let n = m.nrows();
    let mut worst = 0.0_f64;
    for i in 0..n {
        for j in i..n {
            worst = worst.max((m[(i, j)] - m[(j, i)].conj()).norm());
        }
    }
    worst
}

/// Real part of the trace.
pub fn trace_re(m: &CMat) -> f64 {
    assert_square(m);
    (0..m.nrows()).map(|i| m[(i, i)].re).sum()
}

/// Eigenvalues of a Hermitian matrix, ascending. Only the lower triangle is read,
/// so pass a matrix that is Hermitian up to rounding.
#[track_caller]
pub fn hermitian_eigenvalues(m: &CMat) -> Vec<f64> {
    assert_square(m);
    let n = m.nrows();
    match n {
        0 => Vec::new(),
        1 => vec![m[(0, 0)].re],
        2 => {
            let (lo, hi) = eigenvalues_2x2(m);
            vec![lo, hi]
        }
        _ if is_diagonal(m) => {
            // Exactly diagonal (e.g. classical records): the diagonal is the spectrum.
            let mut v: Vec<f64> = (0..n).map(|i| m[(i, i)].re).collect();
            v.sort_by(|x, y| x.total_cmp(y));
            v
        }
        n if n <= SMALL_MAX => {
            let (vals, n) = small_hermitian_eigenvalues(m);
            sorted(vals[..n].to_vec())
        }
        _ => sorted(m.clone().symmetric_eigenvalues().iter().copied().collect()),
    }
}

fn sorted(mut v: Vec<f64>) -> Vec<f64> {
    v.sort_by(|x, y| x.total_cmp(y));
    v
}

/// True when every off-diagonal entry is exactly zero.
fn is_diagonal(m: &CMat) -> bool {
    let n = m.nrows();
    (0..n).all(|i| (0..n).all(|j| i == j || m[(i, j)] == C64::new(0.0, 0.0)))
}

/// `Σᵢ f(λᵢ)` over the eigenvalues of a Hermitian matrix, without allocating for
/// dimensions up to 4 (the hot path of the evaluator: entropies and trace norms).
#[track_caller]
pub fn hermitian_spectral_sum(m: &CMat, f: impl Fn(f64) -> f64) -> f64 {
    assert_square(m);
    match m.nrows() {
        0 => 0.0,
        1 => f(m[(0, 0)].re),
        2 => {
            let (lo, hi) = eigenvalues_2x2(m);
            f(lo) + f(hi)
        }
        n if is_diagonal(m) => (0..n).map(|i| f(m[(i, i)].re)).sum(),
        n if n <= SMALL_MAX => {
            let (vals, n) = small_hermitian_eigenvalues(m);
            vals[..n].iter().map(|&x| f(x)).sum()
        }
        _ => hermitian_eigenvalues(m).into_iter().map(f).sum(),
    }
}

/// Closed-form eigenvalues (ascending) of a 2×2 Hermitian matrix.
fn eigenvalues_2x2(m: &CMat) -> (f64, f64) {
    let a = m[(0, 0)].re;
    let d = m[(1, 1)].re;
    let b = (m[(1, 0)] + m[(0, 1)].conj()) * 0.5;
    let mean = 0.5 * (a + d);
    let r = (0.25 * (a - d) * (a - d) + b.norm_sqr()).sqrt();
    (mean - r, mean + r)
}

/// Largest dimension handled by the stack-allocated solver.
const SMALL_MAX: usize = 8;

/// Eigenvalues (unsorted) of a Hermitian matrix of dimension ≤ 8, on the stack:
/// Householder reduction to a Hermitian tridiagonal matrix, whose spectrum equals that of
/// the real symmetric tridiagonal matrix with the moduli of its off-diagonal, then the
/// implicit QL iteration with Wilkinson-type shifts (Golub & Van Loan, Matrix Computations,
/// §8.3; the QL form as in Bowdler, Martin, Reinsch, Wilkinson, Numer. Math. 11, 293, 1968).
/// Reads the lower triangle.
fn small_hermitian_eigenvalues(m: &CMat) -> ([f64; SMALL_MAX], usize) {
    let n = m.nrows();
    let zero = C64::new(0.0, 0.0);
    let mut a = [[zero; SMALL_MAX]; SMALL_MAX];
    for i in 0..n {
        for j in 0..=i {
            a[i][j] = m[(i, j)];
            a[j][i] = m[(i, j)].conj();
        }
        a[i][i].im = 0.0;
    }
    // Householder: zero column k below the subdiagonal, for k = 0..n-3.
    for k in 0..n.saturating_sub(2) {
        let norm2: f64 = (k + 1..n).map(|i| a[i][k].norm_sqr()).sum();
        let tail: f64 = (k + 2..n).map(|i| a[i][k].norm_sqr()).sum();
        if tail == 0.0 {
            continue;
        }
        let norm = norm2.sqrt();
        let x0 = a[k + 1][k];
        let phase = if x0.norm() > 0.0 { x0 / x0.norm() } else { C64::new(1.0, 0.0) };
        let alpha = -phase * norm;
        let mut v = [zero; SMALL_MAX];
        for i in k + 1..n {
            v[i] = a[i][k];
        }
        v[k + 1] -= alpha;
        let vnorm2: f64 = (k + 1..n).map(|i| v[i].norm_sqr()).sum();
        if vnorm2 == 0.0 {
            continue;
        }
        let beta = 2.0 / vnorm2;
        // A ← H A H with H = 1 − β v v†, using w = β A v, K = ½β v†w, q = w − K v:
        // A ← A − v q† − q v†.
        // Only rows and columns k.. change: earlier ones are already reduced.
        let mut w = [zero; SMALL_MAX];
        for i in k..n {
            let mut sum = zero;
            for j in k + 1..n {
                sum += a[i][j] * v[j];
            }
            w[i] = sum * beta;
        }
        let mut kk = zero;
        for i in k + 1..n {
            kk += v[i].conj() * w[i];
        }
        kk *= 0.5 * beta;
        let mut q = [zero; SMALL_MAX];
        for i in k..n {
            q[i] = w[i] - kk * v[i];
        }
        for i in k..n {
            for j in k..n {
                a[i][j] -= v[i] * q[j].conj() + q[i] * v[j].conj();
            }
        }
    }
    // Real symmetric tridiagonal: diagonal d, off-diagonal |e|.
    let mut d = [0.0; SMALL_MAX];
    let mut e = [0.0; SMALL_MAX];
    for i in 0..n {
        d[i] = a[i][i].re;
        if i + 1 < n {
            e[i] = a[i + 1][i].norm();
        }
    }
    tridiagonal_ql(&mut d[..n], &mut e[..n]);
    (d, n)
}

/// Eigenvalues of the real symmetric tridiagonal matrix with diagonal `d` and
/// off-diagonal `e[0..n-1]` (`e[n-1]` is scratch), in place in `d`: implicit QL.
fn tridiagonal_ql(d: &mut [f64], e: &mut [f64]) {
    let n = d.len();
    if n < 2 {
        return;
    }
    e[n - 1] = 0.0;
    for l in 0..n {
        let mut iter = 0;
        loop {
            let mut m = l;
            while m + 1 < n {
                let dd = d[m].abs() + d[m + 1].abs();
                if e[m].abs() <= f64::EPSILON * dd {
                    break;
                }
                m += 1;
            }
            if m == l {
                break;
            }
            iter += 1;
            if iter > 60 {
                break;
            }
            let mut g = (d[l + 1] - d[l]) / (2.0 * e[l]);
            let mut r = (g * g + 1.0).sqrt();
            g = d[m] - d[l] + e[l] / (g + if g >= 0.0 { r.abs() } else { -r.abs() });
            let (mut s, mut c, mut p) = (1.0, 1.0, 0.0);
            let mut i = m;
            let mut early = false;
            while i > l {
                i -= 1;
                let f = s * e[i];
                let b = c * e[i];
                r = (f * f + g * g).sqrt();
                e[i + 1] = r;
                if r == 0.0 {
                    d[i + 1] -= p;
                    e[m] = 0.0;
                    early = true;
                    break;
                }
                s = f / r;
                c = g / r;
                g = d[i + 1] - p;
                r = (d[i] - g) * s + 2.0 * c * b;
                p = s * r;
                d[i + 1] = g + p;
                g = c * r - b;
            }
            if early {
                continue;
            }
            d[l] -= p;
            e[l] = g;
            e[m] = 0.0;
        }
    }
}

/// Eigen-decomposition of a Hermitian matrix: eigenvalues (ascending) and the matching
/// orthonormal eigenvectors as columns.
#[track_caller]
pub fn hermitian_eigen(m: &CMat) -> (Vec<f64>, CMat) {
    assert_square(m);
    let eig = m.clone().symmetric_eigen();
    let n = m.nrows();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&i, &j| eig.eigenvalues[i].total_cmp(&eig.eigenvalues[j]));
    let vals = order.iter().map(|&i| eig.eigenvalues[i]).collect();
    let mut vecs = CMat::zeros(n, n);
    for (col, &i) in order.iter().enumerate() {
        vecs.set_column(col, &eig.eigenvectors.column(i));
    }
    (vals, vecs)
}

/// Applies a real function to the eigenvalues of a Hermitian matrix:
/// `f(m) = Σ f(λ_i) |v_i><v_i|`.
pub fn hermitian_function(m: &CMat, f: impl Fn(f64) -> f64) -> CMat {
    let (vals, vecs) = hermitian_eigen(m);
    let n = m.nrows();
    let mut out = CMat::zeros(n, n);
    for (i, &lam) in vals.iter().enumerate() {
        let v = vecs.column(i);
        out += (v * v.adjoint()) * c(f(lam), 0.0);
    }
    out
}

/// Right singular vectors of a real matrix whose singular values are at most `cutoff`
/// (its numerical null space), from a singular value decomposition (no Gram matrix, so no
/// squared condition number). A wide matrix's missing singular values count as zero.
#[track_caller]
pub fn real_null_space(m: &RMat, cutoff: f64) -> Vec<RVec> {
    let n = m.ncols();
    if m.nrows() < n {
        // Pad with zero rows: the null space is unchanged and the SVD has n values.
        let mut tall = RMat::zeros(n, n);
        tall.view_mut((0, 0), (m.nrows(), n)).copy_from(m);
        return real_null_space(&tall, cutoff);
    }
    let svd = m.clone().svd(false, true);
    let v_t = svd.v_t.expect("right singular vectors requested");
    (0..n).filter(|&k| svd.singular_values[k] <= cutoff).map(|k| v_t.row(k).transpose()).collect()
}

/// Inverse square root on the support of a positive semidefinite matrix (eigenvalues at or
/// below `cutoff` are treated as zero: pseudo-inverse).
pub fn psd_inverse_sqrt(m: &CMat, cutoff: f64) -> CMat {
    hermitian_function(m, |x| if x > cutoff { 1.0 / x.sqrt() } else { 0.0 })
}

/// Partial trace of an operator on a multi-party space with subsystem dimensions `dims`
/// (first subsystem most significant in the row index), keeping the subsystems listed in
/// `keep` (in increasing order of position) and tracing out the rest.
#[track_caller]
pub fn partial_trace(m: &CMat, dims: &[usize], keep: &[usize]) -> CMat {
    assert_square(m);
    let total: usize = dims.iter().product();
    assert_eq!(m.nrows(), total, "partial_trace: matrix dimension {} does not match dims {:?}", m.nrows(), dims);
    for w in keep.windows(2) {
        assert!(w[0] < w[1], "partial_trace: keep must be strictly increasing, got {keep:?}");
    }
    assert!(keep.iter().all(|&k| k < dims.len()), "partial_trace: keep index out of range");
    let traced: Vec<usize> = (0..dims.len()).filter(|i| !keep.contains(i)).collect();
    let d_keep: usize = keep.iter().map(|&k| dims[k]).product();
    let d_trace: usize = traced.iter().map(|&k| dims[k]).product();
    // Strides of each subsystem in the full index.
    let mut stride = vec![1usize; dims.len()];
    for i in (0..dims.len().saturating_sub(1)).rev() {
        stride[i] = stride[i + 1] * dims[i + 1];
    }
    let compose = |sub: &[usize], idx: usize| -> usize {
        // Full-index offset of index `idx` of the product space over `sub`.
        let mut rest = idx;
        let mut off = 0;
        for &s in sub.iter().rev() {
            off += (rest % dims[s]) * stride[s];
            rest /= dims[s];
        }
        off
    };
    let keep_off: Vec<usize> = (0..d_keep).map(|i| compose(keep, i)).collect();
    let trace_off: Vec<usize> = (0..d_trace).map(|i| compose(&traced, i)).collect();
    let mut out = CMat::zeros(d_keep, d_keep);
    for (i, &ri) in keep_off.iter().enumerate() {
        for (j, &cj) in keep_off.iter().enumerate() {
            let mut s = C64::new(0.0, 0.0);
            for &t in &trace_off {
                s += m[(ri + t, cj + t)];
            }
            out[(i, j)] = s;
        }
    }
    out
}

/// Identity matrix of dimension `n`.
pub fn identity(n: usize) -> CMat {
    CMat::identity(n, n)
}

/// Largest absolute entry of `a − b`.
#[track_caller]
pub fn max_abs_diff(a: &CMat, b: &CMat) -> f64 {
    assert_eq!(a.shape(), b.shape(), "max_abs_diff: shape mismatch");
    a.iter().zip(b.iter()).map(|(x, y)| (x - y).norm()).fold(0.0, f64::max)
}

#[track_caller]
fn assert_square(m: &CMat) {
    assert_eq!(m.nrows(), m.ncols(), "expected a square matrix, got {}×{}", m.nrows(), m.ncols());
}

/// Orthonormalises the columns of a complex matrix by QR (Gram–Schmidt via Householder);
/// the result has orthonormal columns spanning the same space when the input has full
/// column rank. Phases are fixed so that the R factor has a positive real diagonal, which
/// makes QR of a complex Gaussian matrix Haar-distributed (Mezzadri 2007).
pub fn orthonormal_columns(m: &CMat) -> CMat {
    let qr = m.clone().qr();
    let mut q = qr.q();
    let r = qr.r();
    for j in 0..q.ncols().min(r.nrows()) {
        let d = r[(j, j)];
        let n = d.norm();
        if n > 0.0 {
            let phase = d / n;
            let mut col = q.column_mut(j);
            col *= phase;
        }
    }
    q
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::Rng;

    #[test]
    fn null_space_of_real_matrices() {
        // Columns 0 and 1 of a 3 × 3 matrix are equal: null vector (1, −1, 0)/√2.
        let m = RMat::from_row_slice(3, 3, &[1.0, 1.0, 0.0, 2.0, 2.0, 1.0, 0.5, 0.5, 3.0]);
        let null = real_null_space(&m, 1e-12);
        assert_eq!(null.len(), 1);
        assert!((null[0][0] + null[0][1]).abs() < 1e-14 && null[0][2].abs() < 1e-14);
        assert!((&m * &null[0]).norm() < 1e-14);
        // A wide matrix has at least ncols − nrows null vectors.
        assert_eq!(real_null_space(&RMat::from_row_slice(1, 3, &[1.0, 2.0, 3.0]), 1e-12).len(), 2);
    }

    fn rand_herm(n: usize, seed: u64) -> CMat {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let a = CMat::from_fn(n, n, |_, _| c(rng.gen::<f64>() - 0.5, rng.gen::<f64>() - 0.5));
        (&a + a.adjoint()) * c(0.5, 0.0)
    }

    #[test]
    fn eigenvalues_sum_to_trace_and_match_full_solver() {
        for n in 1..7 {
            let m = rand_herm(n, n as u64);
            let v = hermitian_eigenvalues(&m);
            let s: f64 = v.iter().sum();
            assert!((s - trace_re(&m)).abs() < 1e-12);
            let (v2, vecs) = hermitian_eigen(&m);
            for (a, b) in v.iter().zip(&v2) {
                assert!((a - b).abs() < 1e-10);
            }
            // Reconstruct m from its eigen-decomposition.
            let mut r = CMat::zeros(n, n);
            for (i, lam) in v2.iter().enumerate() {
                let col = vecs.column(i);
                r += (col * col.adjoint()) * c(*lam, 0.0);
            }
            assert!(max_abs_diff(&r, &m) < 1e-10);
        }
    }

    #[test]
    fn small_solver_agrees_with_the_general_one_including_degenerate_spectra() {
        let general = |m: &CMat| sorted(m.clone().symmetric_eigenvalues().iter().copied().collect());
        let small = |m: &CMat| {
            let (v, n) = small_hermitian_eigenvalues(m);
            sorted(v[..n].to_vec())
        };
        let mut rng = <rand_chacha::ChaCha8Rng as rand::SeedableRng>::seed_from_u64(99);
        for n in 3..=8 {
            for seed in 0..30 {
                let m = rand_herm(n, 1000 + seed + 37 * n as u64);
                let (a, b) = (general(&m), small(&m));
                for (x, y) in a.iter().zip(&b) {
                    assert!((x - y).abs() < 1e-12, "n = {n}: {a:?} vs {b:?}");
                }
            }
            // Degenerate: rotated projector of rank 2 and a rotated multiple of the identity.
            // A random unitary: the Q factor of a random complex matrix.
            let g = CMat::from_fn(n, n, |_, _| c(rng.gen::<f64>() - 0.5, rng.gen::<f64>() - 0.5));
            let u = g.qr().q();
            let mut diag = vec![c(0.0, 0.0); n];
            diag[0] = c(0.5, 0.0);
            diag[1] = c(0.5, 0.0);
            let p = &u * CMat::from_diagonal(&CVec::from_vec(diag)) * u.adjoint();
            for (x, y) in general(&p).iter().zip(&small(&p)) {
                assert!((x - y).abs() < 1e-13, "degenerate n = {n}");
            }
            let id = &u * CMat::identity(n, n) * c(0.25, 0.0) * u.adjoint();
            for y in small(&id) {
                assert!((y - 0.25).abs() < 1e-14);
            }
            // Tridiagonal already (no Householder step needed) and zero.
            let mut t = CMat::zeros(n, n);
            for i in 0..n {
                t[(i, i)] = c(i as f64, 0.0);
                if i + 1 < n {
                    t[(i + 1, i)] = c(0.3, 0.1);
                    t[(i, i + 1)] = c(0.3, -0.1);
                }
            }
            for (x, y) in general(&t).iter().zip(&small(&t)) {
                assert!((x - y).abs() < 1e-12);
            }
            assert!(small(&CMat::zeros(n, n)).iter().all(|x| *x == 0.0));
        }
    }

    #[test]
    fn partial_trace_of_product_returns_factor() {
        let a = rand_herm(2, 10);
        let b = rand_herm(3, 11);
        let d = rand_herm(2, 12);
        let abd = kron(&kron(&a, &b), &d);
        let tr_b = trace_re(&b);
        let tr_a = trace_re(&a);
        let tr_d = trace_re(&d);
        let keep_a = partial_trace(&abd, &[2, 3, 2], &[0]);
        assert!(max_abs_diff(&keep_a, &(&a * c(tr_b * tr_d, 0.0))) < 1e-12);
        let keep_ad = partial_trace(&abd, &[2, 3, 2], &[0, 2]);
        assert!(max_abs_diff(&keep_ad, &(kron(&a, &d) * c(tr_b, 0.0))) < 1e-12);
        let keep_b = partial_trace(&abd, &[2, 3, 2], &[1]);
        assert!(max_abs_diff(&keep_b, &(&b * c(tr_a * tr_d, 0.0))) < 1e-12);
        let keep_all = partial_trace(&abd, &[2, 3, 2], &[0, 1, 2]);
        assert!(max_abs_diff(&keep_all, &abd) < 1e-15);
    }

    #[test]
    fn inverse_sqrt_inverts_on_support() {
        let m = rand_herm(4, 3);
        let psd = &m * m.adjoint() + identity(4) * c(0.1, 0.0);
        let s = psd_inverse_sqrt(&psd, 1e-14);
        let prod = &s * &psd * &s;
        assert!(max_abs_diff(&prod, &identity(4)) < 1e-10);
    }

    #[test]
    fn orthonormal_columns_are_orthonormal() {
        let m = rand_herm(5, 4);
        let q = orthonormal_columns(&m.columns(0, 3).into_owned());
        let g = q.adjoint() * &q;
        assert!(max_abs_diff(&g, &identity(3)) < 1e-12);
    }
}
