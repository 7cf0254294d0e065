//! The constant-gain (steady-state) filter for time-invariant models: the
//! cheapest update there is, x += K (z - H x), with a fixed gain.

use nalgebra::{SMatrix, SVector};

use crate::check;
use crate::error::{FilterError, Operand, Outcome, idx};
use crate::ldl::Ldl;
use crate::scalar::Scalar;

/// A steady-state Kalman filter: F, H and the steady gain K are fixed, so
/// predict is x = F x and update is x += K (z - H x); no covariance is
/// carried. Gate decisions use the steady innovation covariance S.
///
/// Get K and S from the discrete algebraic Riccati equation (the host tool
/// solves it in extended precision and writes them as constants). The
/// price is the transient: until the full filter would have converged, this
/// one weighs measurements with the steady gain.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SteadyGain<T: Scalar, const N: usize, const M: usize> {
    x: SVector<T, N>,
    f: SMatrix<T, N, N>,
    h: SMatrix<T, M, N>,
    k: SMatrix<T, N, M>,
    s: Ldl<T, M>,
}

impl<T: Scalar, const N: usize, const M: usize> SteadyGain<T, N, M> {
    /// A steady-gain filter from the initial state, F, H, the steady gain K
    /// and the steady innovation covariance S = H P H' + R.
    ///
    /// # Errors
    /// [`FilterError::NonFinite`] for a non-finite input;
    /// [`FilterError::SingularInnovation`] when S is not positive definite.
    ///
    /// # Panics
    /// Never.
    pub fn try_new(
        x: SVector<T, N>,
        f: SMatrix<T, N, N>,
        h: SMatrix<T, M, N>,
        k: SMatrix<T, N, M>,
        s: &SMatrix<T, M, M>,
    ) -> Result<Self, FilterError> {
        check::finite(&x, Operand::State)?;
        check::finite(&f, Operand::Transition)?;
        check::finite(&h, Operand::MeasurementMatrix)?;
        check::finite(&k, Operand::Innovation)?;
        check::finite(s, Operand::Innovation)?;
        let s = Ldl::factor(s).map_err(|j| FilterError::SingularInnovation { pivot: idx(j) })?;
        Ok(Self { x, f, h, k, s })
    }

    /// The state estimate x.
    pub fn state(&self) -> &SVector<T, N> {
        &self.x
    }

    /// x = F x.
    ///
    /// # Errors
    /// [`FilterError::NonFinite`] when the result overflows; nothing changes.
    ///
    /// # Panics
    /// Never.
    pub fn predict(&mut self) -> Result<(), FilterError> {
        let x = self.f * self.x;
        check::finite(&x, Operand::State)?;
        self.x = x;
        Ok(())
    }

    /// x += K (z - H x), unless the NIS against the steady S exceeds `gate`.
    ///
    /// # Errors
    /// [`FilterError::NonFinite`] for a non-finite z or gate; nothing changes.
    ///
    /// # Panics
    /// Never.
    pub fn update(
        &mut self,
        z: &SVector<T, M>,
        gate: Option<T>,
    ) -> Result<Outcome<T>, FilterError> {
        check::finite(z, Operand::Measurement)?;
        check::gate(gate)?;
        let nu = z - self.h * self.x;
        let nis = self.s.inverse_quadratic(&nu);
        if let Some(g) = gate
            && nis > g
        {
            return Ok(Outcome::Gated { nis });
        }
        let x = self.x + self.k * nu;
        check::finite(&x, Operand::State)?;
        self.x = x;
        Ok(Outcome::Applied { nis })
    }
}
