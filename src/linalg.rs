//! The small linear algebra the distance methods need: the inverse of a
//! symmetric positive-definite matrix (a normal or Fisher matrix), by
//! Cholesky decomposition, with a typed error when it is singular.
//!
//! Used by the parallax fit (5 × 5 normal matrix of position, proper motion
//! and parallax), the pulsator's Fourier fit ((2K + 1) × (2K + 1)) and the
//! transient's Fisher matrix (3 × 3). The algorithm is the textbook one
//! (Golub & Van Loan, *Matrix Computations*, Cholesky factorization; common
//! practice): A = L Lᵀ, then A⁻¹ = L⁻ᵀ L⁻¹.

/// Relative size below which a Cholesky pivot counts as zero: pivot d_i of
/// row i is refused when d_i ≤ `PIVOT_REL_TOL` × A_ii. The test is relative
/// to each row's own diagonal, so it does not depend on the units of the
/// parameters (a Fisher matrix mixes days and magnitudes).
pub const PIVOT_REL_TOL: f64 = 1e-10;

/// Why a matrix could not be inverted.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum LinalgError {
    /// The matrix is singular, not positive definite, or too ill-conditioned
    /// to trust (a Cholesky pivot at or below [`PIVOT_REL_TOL`] of its diagonal).
    #[error("singular matrix: pivot {row} is {pivot:e}, not above {tol:e} of its diagonal")]
    Singular {
        /// 0-based row where the factorization failed.
        row: usize,
        /// The pivot found there (before the square root).
        pivot: f64,
        /// The relative tolerance.
        tol: f64,
    },
    /// The input is not square (or is empty), or holds a value that is not finite.
    #[error("not a finite square matrix: {0}")]
    Shape(String),
}

/// Inverse of a symmetric positive-definite matrix given as rows, by
/// Cholesky decomposition. Only the lower triangle is read. Accuracy: the
/// backward-stable Cholesky factorization, relative error of order the
/// condition number times 1e-16.
pub fn spd_inverse(a: &[Vec<f64>]) -> Result<Vec<Vec<f64>>, LinalgError> {
    let n = a.len();
    if n == 0 {
        return Err(LinalgError::Shape("empty".into()));
    }
    if let Some(r) = a.iter().position(|r| r.len() != n) {
        return Err(LinalgError::Shape(format!(
            "row {r} has {} values, expected {n}",
            a[r].len()
        )));
    }
    let flat: Vec<f64> = a.concat();
    let mut l = vec![0.0f64; n * n];
    let mut li = vec![0.0f64; n * n];
    cholesky_inverse(&flat, n, &mut l, &mut li)?;
    Ok((0..n)
        .map(|i| (0..n).map(|j| inverse_element(&li, n, i, j)).collect())
        .collect())
}

/// [`spd_inverse`] for a fixed-size matrix, on the stack: the same
/// arithmetic in the same order (the same functions: bit-identical
/// results), no allocation.
pub fn spd_inverse_n<const N: usize>(a: &[[f64; N]; N]) -> Result<[[f64; N]; N], LinalgError> {
    let li = cholesky_inverse_n(a)?;
    let li = li.as_flattened();
    Ok(std::array::from_fn(|i| {
        std::array::from_fn(|j| inverse_element(li, N, i, j))
    }))
}

/// The last row of the inverse of a fixed-size symmetric positive-definite
/// matrix: the same numbers as the last row of [`spd_inverse_n`] (the same
/// arithmetic), without forming the other rows. For a least-squares fit
/// whose parameter of interest is the last one, it is that parameter's
/// covariance row.
pub fn spd_inverse_last_row_n<const N: usize>(a: &[[f64; N]; N]) -> Result<[f64; N], LinalgError> {
    let li = cholesky_inverse_n(a)?;
    let li = li.as_flattened();
    Ok(std::array::from_fn(|j| inverse_element(li, N, N - 1, j)))
}

/// L⁻¹ of the Cholesky factor of a fixed-size matrix ([`cholesky_inverse`]
/// on the stack).
fn cholesky_inverse_n<const N: usize>(a: &[[f64; N]; N]) -> Result<[[f64; N]; N], LinalgError> {
    if N == 0 {
        return Err(LinalgError::Shape("empty".into()));
    }
    let mut l = [[0.0f64; N]; N];
    let mut li = [[0.0f64; N]; N];
    cholesky_inverse(
        a.as_flattened(),
        N,
        l.as_flattened_mut(),
        li.as_flattened_mut(),
    )?;
    Ok(li)
}

/// The one body of every inverse here: the Cholesky factor L of the n × n
/// matrix `a` (row-major, only its lower triangle read) into `l`, and L⁻¹
/// (lower triangular) into `li`, both row-major n × n and zero on entry.
/// Refuses a value that is not finite and a pivot at or below
/// [`PIVOT_REL_TOL`] of its diagonal. Inlined, so that a fixed size is
/// known to the compiler where it is.
#[inline(always)]
fn cholesky_inverse(a: &[f64], n: usize, l: &mut [f64], li: &mut [f64]) -> Result<(), LinalgError> {
    if a.iter().any(|v| !v.is_finite()) {
        return Err(LinalgError::Shape("a value is not finite".into()));
    }
    for i in 0..n {
        for j in 0..=i {
            let s: f64 = (0..j).map(|k| l[i * n + k] * l[j * n + k]).sum();
            if i == j {
                let d = a[i * n + i] - s;
                if d.is_nan() || d <= PIVOT_REL_TOL * a[i * n + i].abs() || d <= 0.0 {
                    return Err(LinalgError::Singular {
                        row: i,
                        pivot: d,
                        tol: PIVOT_REL_TOL,
                    });
                }
                l[i * n + i] = d.sqrt();
            } else {
                l[i * n + j] = (a[i * n + j] - s) / l[j * n + j];
            }
        }
    }
    // Inverse of L (lower triangular), then A⁻¹ = L⁻ᵀ L⁻¹.
    for i in 0..n {
        li[i * n + i] = 1.0 / l[i * n + i];
        for j in 0..i {
            let s: f64 = (j..i).map(|k| l[i * n + k] * li[k * n + j]).sum();
            li[i * n + j] = -s / l[i * n + i];
        }
    }
    Ok(())
}

/// Element (i, j) of A⁻¹ = L⁻ᵀ L⁻¹ from L⁻¹ (row-major n × n).
#[inline(always)]
fn inverse_element(li: &[f64], n: usize, i: usize, j: usize) -> f64 {
    (i.max(j)..n).map(|k| li[k * n + i] * li[k * n + j]).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inverse_of_a_known_matrix() {
        // [[4, 2], [2, 3]]⁻¹ = (1/8) [[3, -2], [-2, 4]] (by hand).
        let i = spd_inverse(&[vec![4.0, 2.0], vec![2.0, 3.0]]).unwrap();
        assert!((i[0][0] - 0.375).abs() < 1e-15);
        assert!((i[0][1] + 0.25).abs() < 1e-15);
        assert!((i[1][0] + 0.25).abs() < 1e-15);
        assert!((i[1][1] - 0.5).abs() < 1e-15);
    }

    #[test]
    #[allow(clippy::needless_range_loop)]
    fn inverse_times_matrix_is_identity() {
        // A Hilbert-like SPD matrix of size 5 shifted to be well conditioned.
        let n = 5;
        let a: Vec<Vec<f64>> = (0..n)
            .map(|i| {
                (0..n)
                    .map(|j| 1.0 / (i + j + 1) as f64 + if i == j { 1.0 } else { 0.0 })
                    .collect()
            })
            .collect();
        let inv = spd_inverse(&a).unwrap();
        for i in 0..n {
            for j in 0..n {
                let p: f64 = (0..n).map(|k| a[i][k] * inv[k][j]).sum();
                let want = if i == j { 1.0 } else { 0.0 };
                assert!((p - want).abs() < 1e-13, "({i},{j}) {p}");
            }
        }
        let fixed: [[f64; 5]; 5] = std::array::from_fn(|i| std::array::from_fn(|j| a[i][j]));
        let inv2 = spd_inverse_n(&fixed).unwrap();
        assert_eq!(inv2[2][3], inv[2][3]);
        // The stack version and the last-row version do the same arithmetic:
        // every element bit-identical to the allocating one.
        for i in 0..n {
            for j in 0..n {
                assert_eq!(inv2[i][j].to_bits(), inv[i][j].to_bits(), "({i}, {j})");
            }
        }
        let last = spd_inverse_last_row_n(&fixed).unwrap();
        for j in 0..n {
            assert_eq!(last[j].to_bits(), inv[n - 1][j].to_bits(), "last row, {j}");
        }
        let bad = [[1.0, 1.0], [1.0, 1.0]];
        assert!(matches!(
            spd_inverse_last_row_n(&bad),
            Err(LinalgError::Singular { row: 1, .. })
        ));
    }

    #[test]
    #[allow(clippy::needless_range_loop)]
    fn one_body_for_rows_and_arrays() {
        // The rows version and the fixed-size version run one body
        // (cholesky_inverse, inverse_element): bit-identical inverses on a
        // matrix of mixed scales (a normal matrix of days and magnitudes),
        // and the same refusal, row and pivot of a singular one.
        // D B D with B = [[2, 0.5, 0.3], [0.5, 1.5, 0.2], [0.3, 0.2, 1]]
        // (diagonally dominant, so positive definite) and D = diag(1e3, 1, 0.1).
        let a = [[2.0e6, 500.0, 30.0], [500.0, 1.5, 0.02], [30.0, 0.02, 0.01]];
        let rows: Vec<Vec<f64>> = a.iter().map(|r| r.to_vec()).collect();
        let inv = spd_inverse(&rows).unwrap();
        let inv_n = spd_inverse_n(&a).unwrap();
        let last = spd_inverse_last_row_n(&a).unwrap();
        for i in 0..3 {
            for j in 0..3 {
                assert_eq!(inv[i][j].to_bits(), inv_n[i][j].to_bits(), "({i}, {j})");
            }
            assert_eq!(last[i].to_bits(), inv[2][i].to_bits(), "last row, {i}");
        }
        let s = [[1.0, 2.0, 0.0], [2.0, 4.0, 0.0], [0.0, 0.0, 1.0]];
        let rows: Vec<Vec<f64>> = s.iter().map(|r| r.to_vec()).collect();
        assert_eq!(
            spd_inverse(&rows).unwrap_err(),
            spd_inverse_n(&s).unwrap_err()
        );
        let nan = [[f64::NAN]];
        assert!(matches!(spd_inverse_n(&nan), Err(LinalgError::Shape(_))));
    }

    #[test]
    fn singular_and_malformed_are_refused() {
        let e = spd_inverse(&[vec![1.0, 1.0], vec![1.0, 1.0]]).unwrap_err();
        assert!(matches!(e, LinalgError::Singular { row: 1, .. }), "{e}");
        assert!(e.to_string().contains("singular"));
        // Indefinite: a negative pivot.
        assert!(matches!(
            spd_inverse(&[vec![1.0, 2.0], vec![2.0, 1.0]]),
            Err(LinalgError::Singular { .. })
        ));
        assert!(matches!(spd_inverse(&[]), Err(LinalgError::Shape(_))));
        assert!(matches!(
            spd_inverse(&[vec![1.0, 0.0], vec![0.0]]),
            Err(LinalgError::Shape(_))
        ));
        assert!(matches!(
            spd_inverse(&[vec![f64::NAN]]),
            Err(LinalgError::Shape(_))
        ));
    }
}
