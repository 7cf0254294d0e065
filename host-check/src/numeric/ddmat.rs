//! A small dense matrix of double-doubles (row-major `Vec` storage) with
//! the few operations the reference filter and the Riccati solver need.
//!
//! Sizes are checked at run time: the `try_` operations return
//! [`NumericError::DimensionMismatch`]; the operator impls (`&a * &b`, ...)
//! are for callers that already know the shapes and panic on a mismatch,
//! like nalgebra's dynamic matrices.

#![allow(clippy::needless_range_loop)] // index loops read like the formulas

use core::ops::{Add, Index, IndexMut, Mul, Sub};

use nalgebra::{DMatrix, DVector};

use super::{Dd, NumericError};

/// A dense `rows x cols` matrix of [`Dd`].
#[derive(Clone, Debug, PartialEq)]
pub struct DdMatrix {
    rows: usize,
    cols: usize,
    data: Vec<Dd>,
}

impl DdMatrix {
    /// The `rows x cols` zero matrix.
    #[must_use]
    pub fn zeros(rows: usize, cols: usize) -> DdMatrix {
        DdMatrix {
            rows,
            cols,
            data: vec![Dd::ZERO; rows * cols],
        }
    }

    /// The `n x n` identity.
    #[must_use]
    pub fn identity(n: usize) -> DdMatrix {
        let mut m = DdMatrix::zeros(n, n);
        for i in 0..n {
            m[(i, i)] = Dd::ONE;
        }
        m
    }

    /// The exact double-double copy of an `f64` matrix.
    #[must_use]
    pub fn from_f64(m: &DMatrix<f64>) -> DdMatrix {
        let mut out = DdMatrix::zeros(m.nrows(), m.ncols());
        out.assign_f64(m);
        out
    }

    /// A column vector from an `f64` vector.
    #[must_use]
    pub fn from_f64_vector(v: &DVector<f64>) -> DdMatrix {
        let mut out = DdMatrix::zeros(v.len(), 1);
        for (d, s) in out.data.iter_mut().zip(v.iter()) {
            *d = Dd::from_f64(*s);
        }
        out
    }

    /// Overwrites `self` with an `f64` matrix of the same shape.
    ///
    /// # Panics
    /// When the shapes differ.
    pub fn assign_f64(&mut self, m: &DMatrix<f64>) {
        assert_eq!((self.rows, self.cols), m.shape(), "shape mismatch");
        for i in 0..self.rows {
            for j in 0..self.cols {
                self.data[i * self.cols + j] = Dd::from_f64(m[(i, j)]);
            }
        }
    }

    /// Each entry rounded to the nearest `f64`.
    #[must_use]
    pub fn to_f64(&self) -> DMatrix<f64> {
        DMatrix::from_fn(self.rows, self.cols, |i, j| self[(i, j)].to_f64())
    }

    /// Number of rows.
    #[must_use]
    pub fn nrows(&self) -> usize {
        self.rows
    }

    /// Number of columns.
    #[must_use]
    pub fn ncols(&self) -> usize {
        self.cols
    }

    /// (rows, columns).
    #[must_use]
    pub fn shape(&self) -> (usize, usize) {
        (self.rows, self.cols)
    }

    /// True when square.
    #[must_use]
    pub fn is_square(&self) -> bool {
        self.rows == self.cols
    }

    /// The entries in row-major order.
    #[must_use]
    pub fn as_slice(&self) -> &[Dd] {
        &self.data
    }

    /// True when every entry is finite.
    #[must_use]
    pub fn is_finite(&self) -> bool {
        self.data.iter().all(|d| d.is_finite())
    }

    /// The transpose.
    #[must_use]
    pub fn transpose(&self) -> DdMatrix {
        let mut t = DdMatrix::zeros(self.cols, self.rows);
        for i in 0..self.rows {
            for j in 0..self.cols {
                t[(j, i)] = self[(i, j)];
            }
        }
        t
    }

    /// `self * rhs`.
    ///
    /// # Errors
    /// [`NumericError::DimensionMismatch`] when the inner sizes differ.
    pub fn try_mul(&self, rhs: &DdMatrix) -> Result<DdMatrix, NumericError> {
        if self.cols != rhs.rows {
            return Err(NumericError::DimensionMismatch {
                what: "right-hand factor",
                expected: (self.cols, rhs.cols),
                found: rhs.shape(),
            });
        }
        let mut out = DdMatrix::zeros(self.rows, rhs.cols);
        for i in 0..self.rows {
            for j in 0..rhs.cols {
                let mut acc = Dd::ZERO;
                for k in 0..self.cols {
                    acc += self[(i, k)] * rhs[(k, j)];
                }
                out[(i, j)] = acc;
            }
        }
        Ok(out)
    }

    fn same_shape(&self, rhs: &DdMatrix) -> Result<(), NumericError> {
        if self.shape() == rhs.shape() {
            Ok(())
        } else {
            Err(NumericError::DimensionMismatch {
                what: "second operand",
                expected: self.shape(),
                found: rhs.shape(),
            })
        }
    }

    /// `self + rhs`.
    ///
    /// # Errors
    /// [`NumericError::DimensionMismatch`] when the shapes differ.
    pub fn try_add(&self, rhs: &DdMatrix) -> Result<DdMatrix, NumericError> {
        self.same_shape(rhs)?;
        Ok(DdMatrix {
            rows: self.rows,
            cols: self.cols,
            data: self
                .data
                .iter()
                .zip(&rhs.data)
                .map(|(a, b)| *a + *b)
                .collect(),
        })
    }

    /// `self - rhs`.
    ///
    /// # Errors
    /// [`NumericError::DimensionMismatch`] when the shapes differ.
    pub fn try_sub(&self, rhs: &DdMatrix) -> Result<DdMatrix, NumericError> {
        self.same_shape(rhs)?;
        Ok(DdMatrix {
            rows: self.rows,
            cols: self.cols,
            data: self
                .data
                .iter()
                .zip(&rhs.data)
                .map(|(a, b)| *a - *b)
                .collect(),
        })
    }

    /// Every entry multiplied by `s`.
    #[must_use]
    pub fn scale(&self, s: Dd) -> DdMatrix {
        DdMatrix {
            rows: self.rows,
            cols: self.cols,
            data: self.data.iter().map(|a| *a * s).collect(),
        }
    }

    /// Replaces a square matrix by `(A + A') / 2` (exact halving).
    pub fn symmetrize_mut(&mut self) {
        let n = self.rows.min(self.cols);
        for i in 0..n {
            for j in (i + 1)..n {
                let m = (self[(i, j)] + self[(j, i)]) * 0.5;
                self[(i, j)] = m;
                self[(j, i)] = m;
            }
        }
    }

    /// Frobenius norm, in double-double.
    #[must_use]
    pub fn norm(&self) -> Dd {
        self.data.iter().map(|a| a.square()).sum::<Dd>().sqrt()
    }

    /// Largest absolute entry.
    #[must_use]
    pub fn max_abs(&self) -> Dd {
        self.data.iter().fold(Dd::ZERO, |m, a| m.max(a.abs()))
    }

    /// Largest `|A(i,j) - A(j,i)|` over a square matrix.
    #[must_use]
    pub fn asymmetry(&self) -> Dd {
        let n = self.rows.min(self.cols);
        let mut m = Dd::ZERO;
        for i in 0..n {
            for j in (i + 1)..n {
                m = m.max((self[(i, j)] - self[(j, i)]).abs());
            }
        }
        m
    }

    /// The LDL' factorisation of a symmetric matrix (only the lower
    /// triangle is read), without pivoting.
    ///
    /// # Errors
    /// [`NumericError::DimensionMismatch`] when not square;
    /// [`NumericError::NotPositiveDefinite`] when a pivot is not positive
    /// (the matrix is not positive definite, to double-double accuracy) or
    /// an entry is not finite.
    pub fn ldl(&self) -> Result<DdLdl, NumericError> {
        let mut f = DdLdl {
            l: DdMatrix::zeros(self.rows, self.cols),
            d: vec![Dd::ZERO; self.rows],
        };
        f.factor_from(self)?;
        Ok(f)
    }

    /// Solves `self * X = b` for a symmetric positive definite `self`
    /// by LDL'.
    ///
    /// # Errors
    /// As [`DdMatrix::ldl`], and [`NumericError::DimensionMismatch`] when
    /// `b` has the wrong number of rows.
    pub fn solve_spd(&self, b: &DdMatrix) -> Result<DdMatrix, NumericError> {
        let f = self.ldl()?;
        let mut x = b.clone();
        f.solve_mut(&mut x)?;
        Ok(x)
    }

    /// Solves `self * X = b` for a general square `self` by LU with
    /// partial pivoting.
    ///
    /// # Errors
    /// [`NumericError::DimensionMismatch`] on shapes;
    /// [`NumericError::Singular`] when a pivot is zero or the result is not
    /// finite.
    pub fn solve_lu(&self, b: &DdMatrix) -> Result<DdMatrix, NumericError> {
        let n = self.rows;
        if !self.is_square() {
            return Err(NumericError::DimensionMismatch {
                what: "LU operand",
                expected: (n, n),
                found: self.shape(),
            });
        }
        if b.rows != n {
            return Err(NumericError::DimensionMismatch {
                what: "right-hand side",
                expected: (n, b.cols),
                found: b.shape(),
            });
        }
        let mut a = self.clone();
        let mut x = b.clone();
        for k in 0..n {
            let mut p = k;
            let mut best = a[(k, k)].abs();
            for i in (k + 1)..n {
                let v = a[(i, k)].abs();
                if v > best {
                    best = v;
                    p = i;
                }
            }
            if best.hi() == 0.0 || !best.is_finite() {
                return Err(NumericError::Singular { what: "LU operand" });
            }
            if p != k {
                a.swap_rows(p, k);
                x.swap_rows(p, k);
            }
            let piv = a[(k, k)];
            for i in (k + 1)..n {
                let m = a[(i, k)] / piv;
                if m.hi() == 0.0 {
                    continue;
                }
                for j in k..n {
                    let v = a[(k, j)];
                    a[(i, j)] -= m * v;
                }
                for j in 0..x.cols {
                    let v = x[(k, j)];
                    x[(i, j)] -= m * v;
                }
            }
        }
        for k in (0..n).rev() {
            for j in 0..x.cols {
                let mut s = x[(k, j)];
                for i in (k + 1)..n {
                    s -= a[(k, i)] * x[(i, j)];
                }
                x[(k, j)] = s / a[(k, k)];
            }
        }
        if !x.is_finite() {
            return Err(NumericError::Singular { what: "LU operand" });
        }
        Ok(x)
    }

    fn swap_rows(&mut self, a: usize, b: usize) {
        for j in 0..self.cols {
            self.data.swap(a * self.cols + j, b * self.cols + j);
        }
    }

    /// The smallest eigenvalue of a symmetric positive definite matrix, by
    /// inverse iteration with LDL' solves and a Rayleigh quotient, all in
    /// double-double (accurate even when it is far below `f64`'s epsilon
    /// times the largest).
    ///
    /// # Errors
    /// As [`DdMatrix::ldl`] (a matrix that is not positive definite has no
    /// positive smallest eigenvalue; use an `f64` eigen-solver on
    /// [`DdMatrix::to_f64`] to see how negative it is), and
    /// [`NumericError::NoConvergence`] if the iteration stalls (two nearly
    /// equal smallest eigenvalues converge slowly; 500 steps are allowed).
    pub fn smallest_eigenvalue_spd(&self) -> Result<Dd, NumericError> {
        let f = self.ldl()?;
        self.power_iteration(|v| f.solve_mut(v)).map(Dd::recip)
    }

    /// The largest eigenvalue of a symmetric positive semi-definite matrix,
    /// by power iteration in double-double.
    ///
    /// # Errors
    /// [`NumericError::DimensionMismatch`] when not square;
    /// [`NumericError::NoConvergence`] if the iteration stalls.
    pub fn largest_eigenvalue_spd(&self) -> Result<Dd, NumericError> {
        if !self.is_square() {
            return Err(NumericError::DimensionMismatch {
                what: "eigenvalue operand",
                expected: (self.rows, self.rows),
                found: self.shape(),
            });
        }
        self.power_iteration(|v| {
            *v = self.try_mul(v)?;
            Ok(())
        })
    }

    /// The 2-norm condition number `lambda_max / lambda_min` of a symmetric
    /// positive definite matrix, in double-double. `cond * u >= 1` means
    /// rounding the matrix to a format of unit roundoff `u` can destroy its
    /// smallest eigen-direction (common practice, e.g. Higham, *Accuracy and
    /// Stability of Numerical Algorithms*, 2002).
    ///
    /// # Errors
    /// As [`DdMatrix::smallest_eigenvalue_spd`].
    pub fn condition_spd(&self) -> Result<Dd, NumericError> {
        Ok(self.largest_eigenvalue_spd()? / self.smallest_eigenvalue_spd()?)
    }

    /// Rayleigh-quotient power iteration with `apply(v)` replacing `v` by
    /// the operator times `v`; returns the dominant eigenvalue.
    fn power_iteration(
        &self,
        mut apply: impl FnMut(&mut DdMatrix) -> Result<(), NumericError>,
    ) -> Result<Dd, NumericError> {
        let n = self.rows;
        if n == 0 {
            return Ok(Dd::ZERO);
        }
        // Deterministic start with a component in every direction.
        let mut v = DdMatrix::zeros(n, 1);
        for i in 0..n {
            v[(i, 0)] = Dd::from_f64(1.0 + 0.25 * i as f64);
        }
        let mut lambda = Dd::ZERO;
        for it in 0..500 {
            let nv = v.norm();
            if nv.hi() == 0.0 || !nv.is_finite() {
                return Ok(Dd::ZERO);
            }
            let u = v.scale(nv.recip());
            let mut w = u.clone();
            apply(&mut w)?;
            let mut uw = Dd::ZERO;
            for i in 0..n {
                uw += u[(i, 0)] * w[(i, 0)];
            }
            let change = (uw - lambda).abs();
            lambda = uw;
            v = w;
            if it > 2 && change.hi() <= 1e-30 * lambda.hi().abs() {
                return Ok(lambda);
            }
        }
        Err(NumericError::NoConvergence {
            what: "eigenvalue power iteration",
            iterations: 500,
        })
    }
}

/// An LDL' factorisation in double-double: unit lower-triangular `L` and
/// diagonal `D` with `A = L D L'`.
#[derive(Clone, Debug)]
pub struct DdLdl {
    l: DdMatrix,
    d: Vec<Dd>,
}

impl DdLdl {
    /// An empty factorisation for `n x n` matrices (preallocated storage).
    #[must_use]
    pub fn with_size(n: usize) -> DdLdl {
        DdLdl {
            l: DdMatrix::zeros(n, n),
            d: vec![Dd::ZERO; n],
        }
    }

    /// The diagonal `D`.
    #[must_use]
    pub fn diagonal(&self) -> &[Dd] {
        &self.d
    }

    /// The unit lower-triangular factor `L`.
    #[must_use]
    pub fn lower(&self) -> &DdMatrix {
        &self.l
    }

    /// Factors `a` (lower triangle read) into this storage, reusing it
    /// when the size matches.
    ///
    /// # Errors
    /// As [`DdMatrix::ldl`].
    pub fn factor_from(&mut self, a: &DdMatrix) -> Result<(), NumericError> {
        let n = a.rows;
        if !a.is_square() {
            return Err(NumericError::DimensionMismatch {
                what: "LDL' operand",
                expected: (n, n),
                found: a.shape(),
            });
        }
        if self.l.shape() != (n, n) {
            self.l = DdMatrix::zeros(n, n);
            self.d = vec![Dd::ZERO; n];
        }
        for j in 0..n {
            let mut dj = a[(j, j)];
            for k in 0..j {
                let ljk = self.l[(j, k)];
                dj -= ljk * ljk * self.d[k];
            }
            if dj.hi() <= 0.0 || !dj.is_finite() {
                return Err(NumericError::NotPositiveDefinite {
                    what: "LDL' operand",
                });
            }
            self.d[j] = dj;
            self.l[(j, j)] = Dd::ONE;
            for i in (j + 1)..n {
                let mut s = a[(i, j)];
                for k in 0..j {
                    s -= self.l[(i, k)] * self.l[(j, k)] * self.d[k];
                }
                self.l[(i, j)] = s / dj;
                self.l[(j, i)] = Dd::ZERO;
            }
        }
        Ok(())
    }

    /// Solves `A X = B` in place (`B` becomes `X`).
    ///
    /// # Errors
    /// [`NumericError::DimensionMismatch`] when `b` has the wrong number of rows.
    pub fn solve_mut(&self, b: &mut DdMatrix) -> Result<(), NumericError> {
        let n = self.d.len();
        if b.rows != n {
            return Err(NumericError::DimensionMismatch {
                what: "right-hand side",
                expected: (n, b.cols),
                found: b.shape(),
            });
        }
        for c in 0..b.cols {
            for i in 0..n {
                let mut s = b[(i, c)];
                for k in 0..i {
                    s -= self.l[(i, k)] * b[(k, c)];
                }
                b[(i, c)] = s;
            }
            for i in 0..n {
                b[(i, c)] = b[(i, c)] / self.d[i];
            }
            for i in (0..n).rev() {
                let mut s = b[(i, c)];
                for k in (i + 1)..n {
                    s -= self.l[(k, i)] * b[(k, c)];
                }
                b[(i, c)] = s;
            }
        }
        Ok(())
    }
}

impl Index<(usize, usize)> for DdMatrix {
    type Output = Dd;
    #[inline]
    fn index(&self, (i, j): (usize, usize)) -> &Dd {
        assert!(i < self.rows && j < self.cols, "index out of range");
        &self.data[i * self.cols + j]
    }
}

impl IndexMut<(usize, usize)> for DdMatrix {
    #[inline]
    fn index_mut(&mut self, (i, j): (usize, usize)) -> &mut Dd {
        assert!(i < self.rows && j < self.cols, "index out of range");
        &mut self.data[i * self.cols + j]
    }
}

impl Mul for &DdMatrix {
    type Output = DdMatrix;
    /// # Panics
    /// On mismatched shapes (use [`DdMatrix::try_mul`] to get an error).
    fn mul(self, rhs: &DdMatrix) -> DdMatrix {
        match self.try_mul(rhs) {
            Ok(m) => m,
            Err(e) => panic!("{e}"),
        }
    }
}

impl Add for &DdMatrix {
    type Output = DdMatrix;
    /// # Panics
    /// On mismatched shapes (use [`DdMatrix::try_add`] to get an error).
    fn add(self, rhs: &DdMatrix) -> DdMatrix {
        match self.try_add(rhs) {
            Ok(m) => m,
            Err(e) => panic!("{e}"),
        }
    }
}

impl Sub for &DdMatrix {
    type Output = DdMatrix;
    /// # Panics
    /// On mismatched shapes (use [`DdMatrix::try_sub`] to get an error).
    fn sub(self, rhs: &DdMatrix) -> DdMatrix {
        match self.try_sub(rhs) {
            Ok(m) => m,
            Err(e) => panic!("{e}"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn products_and_transpose_match_f64_on_exact_data() {
        // Small integers multiply exactly in any format (hand-checkable).
        let a = DdMatrix::from_f64(&dmat![1.0, 2.0, 3.0; 4.0, 5.0, 6.0]);
        let b = DdMatrix::from_f64(&dmat![7.0, 8.0; 9.0, 10.0; 11.0, 12.0]);
        let c = &a * &b;
        assert_eq!(c.to_f64(), dmat![58.0, 64.0; 139.0, 154.0]);
        assert_eq!(a.transpose().to_f64(), dmat![1.0, 4.0; 2.0, 5.0; 3.0, 6.0]);
        assert_eq!((&c - &c).max_abs(), Dd::ZERO);
        assert_eq!((&c + &c).to_f64(), dmat![116.0, 128.0; 278.0, 308.0]);
        assert_eq!((&DdMatrix::identity(2) * &c), c);
        assert!(matches!(
            a.try_mul(&a),
            Err(NumericError::DimensionMismatch { .. })
        ));
        assert!(matches!(
            a.try_add(&b),
            Err(NumericError::DimensionMismatch { .. })
        ));
    }

    #[test]
    fn hilbert_solve_is_accurate_in_double_double() {
        // The 8x8 Hilbert matrix (cond ~ 1.5e10, a classic test, e.g.
        // Higham 2002) with right-hand side H * ones: the solution is ones.
        // f64 gets ~6 digits; double-double must get ~20.
        let n = 8;
        let mut h = DdMatrix::zeros(n, n);
        for i in 0..n {
            for j in 0..n {
                h[(i, j)] = Dd::ONE / Dd::from_f64((i + j + 1) as f64);
            }
        }
        let mut ones = DdMatrix::zeros(n, 1);
        for i in 0..n {
            ones[(i, 0)] = Dd::ONE;
        }
        let b = &h * &ones;
        for x in [h.solve_spd(&b).unwrap(), h.solve_lu(&b).unwrap()] {
            let err = (&x - &ones).max_abs().to_f64();
            assert!(err < 1e-18, "{err}");
        }
        // 2-norm condition number of Hilbert(8) = 1.5258e10 (Higham 2002;
        // from memory), 15257575741.6469428 computed with 50-digit mpmath.
        let cond = h.condition_spd().unwrap().to_f64();
        assert!(
            (cond / 15_257_575_741.646_943 - 1.0).abs() < 1e-12,
            "{cond}"
        );
    }

    #[test]
    fn eigenvalues_of_a_known_matrix() {
        // [[2,1],[1,2]] has eigenvalues 1 and 3 (closed form).
        let a = DdMatrix::from_f64(&dmat![2.0, 1.0; 1.0, 2.0]);
        assert!((a.smallest_eigenvalue_spd().unwrap() - 1.0).abs().to_f64() < 1e-28);
        assert!((a.largest_eigenvalue_spd().unwrap() - 3.0).abs().to_f64() < 1e-28);
        // [[1, 1], [1, 1 + e]] with e = 2^-70: smallest eigenvalue
        // e/2 - e^2/4 + O(e^3) (closed form of the 2x2 eigenproblem), far
        // below f64's reach but inside double-double's.
        let e = 2f64.powi(-70);
        let mut b = DdMatrix::from_f64(&dmat![1.0, 1.0; 1.0, 1.0]);
        b[(1, 1)] = Dd::ONE + e;
        let l = b.smallest_eigenvalue_spd().unwrap().to_f64();
        assert!((l / (e / 2.0) - 1.0).abs() < 1e-15, "{l}");
    }

    #[test]
    fn singular_and_indefinite_are_errors() {
        let s = DdMatrix::from_f64(&dmat![1.0, 2.0; 2.0, 4.0]);
        let rhs = DdMatrix::from_f64(&dmat![1.0; 1.0]);
        assert!(matches!(
            s.solve_lu(&rhs),
            Err(NumericError::Singular { .. })
        ));
        assert!(matches!(
            s.ldl(),
            Err(NumericError::NotPositiveDefinite { .. })
        ));
        let ind = DdMatrix::from_f64(&dmat![1.0, 0.0; 0.0, -1.0]);
        assert!(matches!(
            ind.solve_spd(&rhs),
            Err(NumericError::NotPositiveDefinite { .. })
        ));
        assert!(matches!(
            DdMatrix::zeros(2, 3).ldl(),
            Err(NumericError::DimensionMismatch { .. })
        ));
        // Symmetrising is exact halving of the pair sum.
        let mut m = DdMatrix::from_f64(&dmat![1.0, 2.0; 4.0, 1.0]);
        assert_eq!(m.asymmetry().to_f64(), 2.0);
        m.symmetrize_mut();
        assert_eq!(m.to_f64(), dmat![1.0, 3.0; 3.0, 1.0]);
    }
}
