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
#[allow(clippy::needless_range_loop)] // index form mirrors the textbook algorithm
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
    if a.iter().flatten().any(|v| !v.is_finite()) {
        return Err(LinalgError::Shape("a value is not finite".into()));
    }
    let mut l = vec![vec![0.0f64; n]; n];
    for i in 0..n {
        for j in 0..=i {
            let s: f64 = (0..j).map(|k| l[i][k] * l[j][k]).sum();
            if i == j {
                let d = a[i][i] - s;
                if d.is_nan() || d <= PIVOT_REL_TOL * a[i][i].abs() || d <= 0.0 {
                    return Err(LinalgError::Singular {
                        row: i,
                        pivot: d,
                        tol: PIVOT_REL_TOL,
                    });
                }
                l[i][i] = d.sqrt();
            } else {
                l[i][j] = (a[i][j] - s) / l[j][j];
            }
        }
    }
    // Inverse of L (lower triangular), then A⁻¹ = L⁻ᵀ L⁻¹.
    let mut li = vec![vec![0.0f64; n]; n];
    for i in 0..n {
        li[i][i] = 1.0 / l[i][i];
        for j in 0..i {
            let s: f64 = (j..i).map(|k| l[i][k] * li[k][j]).sum();
            li[i][j] = -s / l[i][i];
        }
    }
    let mut inv = vec![vec![0.0f64; n]; n];
    for i in 0..n {
        for j in 0..n {
            inv[i][j] = (i.max(j)..n).map(|k| li[k][i] * li[k][j]).sum();
        }
    }
    Ok(inv)
}

/// [`spd_inverse`] for a fixed-size matrix, on the stack: the same
/// arithmetic in the same order (bit-identical results), no allocation.
pub fn spd_inverse_n<const N: usize>(a: &[[f64; N]; N]) -> Result<[[f64; N]; N], LinalgError> {
    let li = cholesky_inverse_n(a)?;
    let mut inv = [[0.0f64; N]; N];
    for i in 0..N {
        for j in 0..N {
            inv[i][j] = (i.max(j)..N).map(|k| li[k][i] * li[k][j]).sum();
        }
    }
    Ok(inv)
}

/// The last row of the inverse of a fixed-size symmetric positive-definite
/// matrix: the same numbers as the last row of [`spd_inverse_n`] (the same
/// arithmetic), without forming the other rows. For a least-squares fit
/// whose parameter of interest is the last one, it is that parameter's
/// covariance row.
pub fn spd_inverse_last_row_n<const N: usize>(a: &[[f64; N]; N]) -> Result<[f64; N], LinalgError> {
    let li = cholesky_inverse_n(a)?;
    let mut row = [0.0f64; N];
    let last = N - 1;
    for (j, r) in row.iter_mut().enumerate() {
        *r = (last.max(j)..N).map(|k| li[k][last] * li[k][j]).sum();
    }
    Ok(row)
}

/// L⁻¹ of the Cholesky factor of a fixed-size matrix, as [`spd_inverse`]
/// computes it.
#[allow(clippy::needless_range_loop)] // index form mirrors the textbook algorithm
fn cholesky_inverse_n<const N: usize>(a: &[[f64; N]; N]) -> Result<[[f64; N]; N], LinalgError> {
    if N == 0 {
        return Err(LinalgError::Shape("empty".into()));
    }
    if a.iter().flatten().any(|v| !v.is_finite()) {
        return Err(LinalgError::Shape("a value is not finite".into()));
    }
    let mut l = [[0.0f64; N]; N];
    for i in 0..N {
        for j in 0..=i {
            let s: f64 = (0..j).map(|k| l[i][k] * l[j][k]).sum();
            if i == j {
                let d = a[i][i] - s;
                if d.is_nan() || d <= PIVOT_REL_TOL * a[i][i].abs() || d <= 0.0 {
                    return Err(LinalgError::Singular {
                        row: i,
                        pivot: d,
                        tol: PIVOT_REL_TOL,
                    });
                }
                l[i][i] = d.sqrt();
            } else {
                l[i][j] = (a[i][j] - s) / l[j][j];
            }
        }
    }
    let mut li = [[0.0f64; N]; N];
    for i in 0..N {
        li[i][i] = 1.0 / l[i][i];
        for j in 0..i {
            let s: f64 = (j..i).map(|k| l[i][k] * li[k][j]).sum();
            li[i][j] = -s / l[i][i];
        }
    }
    Ok(li)
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
