//! Structural zeros and ones of a model's matrices, declared at compile time.
//!
//! Typical Jacobians are mostly zeros and ones: the planar pose model's F is
//! the identity plus two entries, a position fix's H selects two states, an
//! error-state filter's F is block-sparse. A model states which entries are
//! *structurally* zero or one (for every state and input) as a [`Pattern`]
//! const on its trait; the filters' kernels then skip the products with a
//! zero and take a one's product as the other factor itself.
//!
//! The arithmetic that remains is the dense arithmetic minus terms that are
//! exactly zero, in the same order: each entry is the same sum of the same
//! products (x * 1 is x exactly, and adding a zero product changes nothing
//! but, at most, the sign of an exact zero). A patterned filter computes the
//! dense filter's numbers, at a cost that follows the non-zero entries, and
//! one loop shape serves host and target alike, so the host's f32 remains the
//! target's bit for bit.
//!
//! The pattern is part of the model, like its Jacobian: a kernel never reads
//! an entry the pattern declares, so a wrong pattern gives a wrong filter.
//! [`Pattern::first_violation`] finds an entry a matrix breaks;
//! `cairn check` applies it to every Jacobian and noise-source matrix along
//! the reference run and fails a model whose matrices break their pattern.

use nalgebra::SMatrix;

use crate::scalar::Scalar;

/// What one entry of a matrix is for every state and input.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Entry {
    /// Always exactly zero: the kernels skip its products.
    Zero,
    /// Always exactly one: the kernels take its products as the other factor.
    One,
    /// Any value: the kernels multiply by it.
    Free,
}

/// Which entries of an `R` x `C` matrix are structurally zero or one.
///
/// Built in a `const` from [`Pattern::DENSE`], [`Pattern::ZERO`] or
/// [`Pattern::IDENTITY`] and the builder methods; an index out of range is
/// then a compile error. The pose model's F, the identity with the heading
/// column free in the position rows:
///
/// ```
/// use cairn_core::{Entry, Pattern};
///
/// const F: Pattern<3, 3> = Pattern::IDENTITY.free(0, 2).free(1, 2);
/// assert_eq!(F.entry(0, 2), Entry::Free);
/// assert_eq!(F.entry(2, 0), Entry::Zero);
/// assert_eq!(F.entry(1, 1), Entry::One);
/// assert_eq!(F.nonzero(), 5);
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Pattern<const R: usize, const C: usize> {
    /// Row-major entries.
    cells: [[Entry; C]; R],
    /// Per row, the non-zero entries in ascending column order, each as its
    /// column with [`ONE_FLAG`] set for a structural one.
    list: [[u8; C]; R],
    /// Per row, how many of `list`'s entries are in use.
    len: [u8; R],
    /// Whether column j has a non-zero entry in some row.
    used: [bool; C],
    /// Whether every entry is free.
    dense: bool,
}

/// Set in a list entry when the entry is a structural one.
const ONE_FLAG: u8 = 0x80;

/// The widest pattern whose rows the kernels scan entry by entry (see
/// `each_in_row`).
const SCAN_LIMIT: usize = 6;

impl<const R: usize, const C: usize> Pattern<R, C> {
    /// Every entry free: the dense kernels, the default of every model.
    pub const DENSE: Self = Self::from_cells([[Entry::Free; C]; R]);

    /// Every entry zero (make some free or one with the builders).
    pub const ZERO: Self = Self::from_cells([[Entry::Zero; C]; R]);

    /// Ones on the diagonal (entries (i, i)), zeros elsewhere.
    pub const IDENTITY: Self = {
        let mut cells = [[Entry::Zero; C]; R];
        let mut i = 0;
        while i < R && i < C {
            cells[i][i] = Entry::One;
            i += 1;
        }
        Self::from_cells(cells)
    };

    /// A pattern from its entries, row by row.
    ///
    /// # Panics
    /// When a dimension exceeds 127 (a compile error in a `const`).
    #[must_use]
    pub const fn from_cells(cells: [[Entry; C]; R]) -> Self {
        assert!(
            R < 128 && C < 128,
            "a pattern has at most 127 rows and columns"
        );
        let mut list = [[0u8; C]; R];
        let mut len = [0u8; R];
        let mut used = [false; C];
        let mut dense = true;
        let mut i = 0;
        while i < R {
            let mut j = 0;
            let mut n = 0;
            while j < C {
                dense &= matches!(cells[i][j], Entry::Free);
                let code = match cells[i][j] {
                    Entry::Zero => None,
                    // Checked above: j < 128.
                    #[allow(clippy::cast_possible_truncation)]
                    Entry::One => Some(j as u8 | ONE_FLAG),
                    #[allow(clippy::cast_possible_truncation)]
                    Entry::Free => Some(j as u8),
                };
                if let Some(code) = code {
                    list[i][n] = code;
                    n += 1;
                    used[j] = true;
                }
                j += 1;
            }
            // n <= C < 128.
            #[allow(clippy::cast_possible_truncation)]
            {
                len[i] = n as u8;
            }
            i += 1;
        }
        Self {
            cells,
            list,
            len,
            used,
            dense,
        }
    }

    /// The same pattern with entry (`row`, `col`) set to `entry`.
    ///
    /// # Panics
    /// When the index is out of range (a compile error in a `const`).
    #[must_use]
    pub const fn with(self, row: usize, col: usize, entry: Entry) -> Self {
        let mut cells = self.cells;
        cells[row][col] = entry;
        Self::from_cells(cells)
    }

    /// The same pattern with entry (`row`, `col`) free.
    ///
    /// # Panics
    /// As [`Pattern::with`].
    #[must_use]
    pub const fn free(self, row: usize, col: usize) -> Self {
        self.with(row, col, Entry::Free)
    }

    /// The same pattern with entry (`row`, `col`) a structural one.
    ///
    /// # Panics
    /// As [`Pattern::with`].
    #[must_use]
    pub const fn one(self, row: usize, col: usize) -> Self {
        self.with(row, col, Entry::One)
    }

    /// The same pattern with entry (`row`, `col`) a structural zero.
    ///
    /// # Panics
    /// As [`Pattern::with`].
    #[must_use]
    pub const fn zero(self, row: usize, col: usize) -> Self {
        self.with(row, col, Entry::Zero)
    }

    /// The same pattern with the `rows` x `cols` block at (`row`, `col`)
    /// set to `entry`.
    ///
    /// # Panics
    /// When the block does not fit (a compile error in a `const`).
    #[must_use]
    pub const fn block(
        self,
        row: usize,
        col: usize,
        rows: usize,
        cols: usize,
        entry: Entry,
    ) -> Self {
        let mut cells = self.cells;
        let mut i = 0;
        while i < rows {
            let mut j = 0;
            while j < cols {
                cells[row + i][col + j] = entry;
                j += 1;
            }
            i += 1;
        }
        Self::from_cells(cells)
    }

    /// The same pattern with the `rows` x `cols` block at (`row`, `col`)
    /// free.
    ///
    /// # Panics
    /// As [`Pattern::block`].
    #[must_use]
    pub const fn free_block(self, row: usize, col: usize, rows: usize, cols: usize) -> Self {
        self.block(row, col, rows, cols, Entry::Free)
    }

    /// The entry at (`row`, `col`).
    ///
    /// # Panics
    /// When the index is out of range.
    #[must_use]
    pub const fn entry(&self, row: usize, col: usize) -> Entry {
        self.cells[row][col]
    }

    /// How many entries are not structural zeros.
    #[must_use]
    pub const fn nonzero(&self) -> usize {
        let mut n = 0;
        let mut i = 0;
        while i < R {
            n += self.len[i] as usize;
            i += 1;
        }
        n
    }

    /// `true` when every entry is free (the dense kernels apply).
    #[must_use]
    pub const fn is_dense(&self) -> bool {
        self.dense
    }

    /// `true` when the kernels scan this pattern's rows entry by entry (at
    /// most [`SCAN_LIMIT`] columns: the entries fold into straight-line
    /// code; see `each_in_row`).
    #[must_use]
    pub(crate) const fn is_scanned(&self) -> bool {
        C <= SCAN_LIMIT
    }

    /// `true` when every entry off the diagonal is a structural zero: a
    /// noise covariance of independent components.
    #[must_use]
    pub const fn is_diagonal(&self) -> bool {
        let mut i = 0;
        while i < R {
            let mut j = 0;
            while j < C {
                if i != j && !matches!(self.cells[i][j], Entry::Zero) {
                    return false;
                }
                j += 1;
            }
            i += 1;
        }
        true
    }

    /// For each row, `true` when it is a unit row: a structural one on the
    /// diagonal and structural zeros elsewhere (a state the transition
    /// carries over unchanged). Such a row of F makes `(F P F')[i,i]` `P[i,i]`
    /// exactly in the patterned kernels.
    #[must_use]
    pub const fn unit_rows(&self) -> [bool; R] {
        let mut out = [false; R];
        let mut i = 0;
        while i < R {
            let mut unit = i < C;
            let mut j = 0;
            while j < C {
                unit &= match self.cells[i][j] {
                    Entry::One => i == j,
                    Entry::Zero => i != j,
                    Entry::Free => false,
                };
                j += 1;
            }
            out[i] = unit;
            i += 1;
        }
        out
    }

    /// `m` with the pattern's structural entries in place: zeros and ones
    /// where the pattern declares them, `m`'s own entries where it leaves
    /// them free. The matrix the kernels work with (they never read a
    /// declared entry of `m`).
    #[inline(always)]
    pub(crate) fn apply<T: Scalar>(&self, m: &SMatrix<T, R, C>) -> SMatrix<T, R, C> {
        SMatrix::<T, R, C>::from_fn(|i, j| match self.cells[i][j] {
            Entry::Zero => T::zero(),
            Entry::One => T::one(),
            Entry::Free => m[(i, j)],
        })
    }

    /// The transposed pattern.
    #[must_use]
    pub const fn transpose(&self) -> Pattern<C, R> {
        let mut cells = [[Entry::Zero; R]; C];
        let mut i = 0;
        while i < R {
            let mut j = 0;
            while j < C {
                cells[j][i] = self.cells[i][j];
                j += 1;
            }
            i += 1;
        }
        Pattern::from_cells(cells)
    }

    /// The first entry, in row-major order, where `m` breaks the pattern: a
    /// declared zero that is not exactly zero or a declared one that is not
    /// exactly one. `None` when `m` fits.
    #[must_use]
    pub fn first_violation<T: Scalar>(&self, m: &SMatrix<T, R, C>) -> Option<(usize, usize)> {
        for i in 0..R {
            for j in 0..C {
                let v = m[(i, j)];
                let fits = match self.cells[i][j] {
                    Entry::Zero => v == T::zero(),
                    Entry::One => v == T::one(),
                    Entry::Free => true,
                };
                if !fits {
                    return Some((i, j));
                }
            }
        }
        None
    }

    /// Calls `visit(column, is_one)` for row `row`'s non-zero entries in
    /// ascending column order.
    ///
    /// Narrow patterns (at most [`SCAN_LIMIT`] columns) scan every column:
    /// the loops then have constant trip counts, unroll completely, and the
    /// entries, constants, fold away into straight-line code. Wider ones
    /// walk the row's list of non-zero columns. The columns are below `C`
    /// (the pattern was built so); the walk still tests it, which keeps the
    /// kernels free of panic paths.
    #[inline(always)]
    pub(crate) fn each_in_row(&self, row: usize, mut visit: impl FnMut(usize, bool)) {
        if self.is_scanned() {
            for col in 0..C {
                match self.cells[row][col] {
                    Entry::Zero => {}
                    Entry::One => visit(col, true),
                    Entry::Free => visit(col, false),
                }
            }
        } else {
            let n = usize::from(self.len[row]).min(C);
            for t in 0..n {
                let code = self.list[row][t];
                let col = usize::from(code & !ONE_FLAG);
                if col < C {
                    visit(col, code & ONE_FLAG != 0);
                }
            }
        }
    }

    /// Row `row`'s non-zero entries as `(column, is_one)`, ascending (tests).
    #[cfg(test)]
    pub(crate) fn row(&self, row: usize) -> std::vec::Vec<(usize, bool)> {
        let mut out = std::vec::Vec::new();
        self.each_in_row(row, |col, one| out.push((col, one)));
        out
    }

    /// Whether column `col` has a non-zero entry in some row.
    #[inline(always)]
    pub(crate) fn column_used(&self, col: usize) -> bool {
        self.used[col]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builders_lists_and_transpose() {
        const P: Pattern<3, 4> = Pattern::ZERO.one(0, 0).free(0, 3).free_block(1, 1, 2, 2);
        assert_eq!(P.row(0), [(0, true), (3, false)]);
        assert_eq!(P.row(1), [(1, false), (2, false)]);
        assert_eq!(P.nonzero(), 6);
        assert!(!P.is_dense() && Pattern::<2, 5>::DENSE.is_dense());
        let t = P.transpose();
        assert_eq!(t.row(3), [(0, false)]);
        assert_eq!(t.row(0), [(0, true)]);
        assert!(P.column_used(3) && !Pattern::<2, 2>::IDENTITY.zero(1, 1).column_used(1));
        assert_eq!(Pattern::<2, 3>::IDENTITY.nonzero(), 2);
    }

    #[test]
    fn unit_rows_are_exactly_the_rows_carried_over() {
        // The pose model's F: the identity plus the heading's effect on x, y.
        const F: Pattern<3, 3> = Pattern::IDENTITY.free(0, 2).free(1, 2);
        assert_eq!(F.unit_rows(), [false, false, true]);
        assert_eq!(Pattern::<3, 3>::IDENTITY.unit_rows(), [true; 3]);
        assert_eq!(Pattern::<3, 3>::DENSE.unit_rows(), [false; 3]);
        // A free diagonal, a one off the diagonal, a zero row: not carried.
        const G: Pattern<3, 3> = Pattern::IDENTITY.free(0, 0).zero(1, 1).one(1, 0).zero(2, 2);
        assert_eq!(G.unit_rows(), [false; 3]);
        // A row below the square part has no diagonal entry.
        assert_eq!(Pattern::<3, 2>::IDENTITY.unit_rows(), [true, true, false]);
    }

    #[test]
    fn violations_name_the_first_broken_entry() {
        const P: Pattern<2, 2> = Pattern::IDENTITY.free(0, 1);
        let ok = SMatrix::<f32, 2, 2>::new(1.0, 7.0, 0.0, 1.0);
        assert_eq!(P.first_violation(&ok), None);
        let zero_broken = SMatrix::<f32, 2, 2>::new(1.0, 7.0, 1e-30, 1.0);
        assert_eq!(P.first_violation(&zero_broken), Some((1, 0)));
        let one_broken = SMatrix::<f64, 2, 2>::new(1.0, 0.0, 0.0, 1.0 + 1e-15);
        assert_eq!(P.first_violation(&one_broken), Some((1, 1)));
        // -0 is a zero.
        let negative_zero = SMatrix::<f32, 2, 2>::new(1.0, 0.0, -0.0, 1.0);
        assert_eq!(P.first_violation(&negative_zero), None);
    }
}
