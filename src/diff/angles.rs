//! Principal angles between two subspaces (Björck & Golub 1973, "Numerical
//! methods for computing angles between linear subspaces", Math. Comp.
//! 27:579–594; sines are used for small angles, as in
//! scipy.linalg.subspace_angles).

use nalgebra::DMatrix;

/// Principal angles (degrees, largest first) between the column spaces of `a` and `b`.
pub fn principal_angles(a: &DMatrix<f64>, b: &DMatrix<f64>) -> Vec<f64> {
    let qa = a.clone().qr().q();
    let qb = b.clone().qr().q();
    let m = qa.transpose() * &qb;
    let mut cosines = singular_values(&m);
    cosines.sort_by(|x, y| y.total_cmp(x));
    let residual = if qa.ncols() >= qb.ncols() {
        &qb - &qa * &m
    } else {
        &qa - &qb * m.transpose()
    };
    let mut sines = singular_values(&residual);
    sines.sort_by(|x, y| y.total_cmp(x));
    let count = qa.ncols().min(qb.ncols());
    (0..count)
        .map(|i| {
            // Largest angle first: pair the i-th largest sine with the i-th smallest cosine.
            let cos = cosines[count - 1 - i].clamp(-1.0, 1.0);
            let radians = if cos * cos >= 0.5 {
                libm::asin(sines.get(i).copied().unwrap_or(0.0).clamp(-1.0, 1.0))
            } else {
                libm::acos(cos)
            };
            radians.to_degrees()
        })
        .collect()
}

fn singular_values(m: &DMatrix<f64>) -> Vec<f64> {
    if m.nrows() == 0 || m.ncols() == 0 {
        return Vec::new();
    }
    m.clone()
        .svd(false, false)
        .singular_values
        .iter()
        .copied()
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(got: &[f64], want: &[f64], tol: f64) {
        assert_eq!(got.len(), want.len(), "{got:?} vs {want:?}");
        for (g, w) in got.iter().zip(want) {
            assert!((g - w).abs() <= tol, "{got:?} vs {want:?}");
        }
    }

    // Expected values from scipy 1.17.1 (numpy 2.4.6):
    //   import numpy as np; from scipy.linalg import subspace_angles
    //   A = np.array([[1., 0.], [0., 1.], [0., 0.], [0., 0.]])
    //   B = np.array([[0., 0.], [0., 0.], [1., 0.], [0., 1.]])
    //   np.degrees(subspace_angles(A, B))            # [90. 90.]
    //   C = np.array([[1., 2.], [.5, -1.], [.25, 0.], [2., 1.5], [-1., .5]])
    //   D = np.array([[1.1, 1.9, .3], [.4, -1.2, 1.], [.2, .1, 0.], [2.1, 1.4, -.5], [-.9, .6, .2]])
    //   np.degrees(subspace_angles(C, D))            # [4.14561418, 1.02762672]
    //   np.degrees(subspace_angles(C, C))            # [9.8e-15, 7.6e-16]
    //   E = np.array([[1.], [1e-9], [0.]]); F = np.array([[1.], [0.], [0.]])
    //   np.degrees(subspace_angles(E, F))            # [5.72957795e-08]
    #[test]
    fn principal_angles_match_scipy() {
        let a = DMatrix::from_row_slice(4, 2, &[1., 0., 0., 1., 0., 0., 0., 0.]);
        let b = DMatrix::from_row_slice(4, 2, &[0., 0., 0., 0., 1., 0., 0., 1.]);
        close(&principal_angles(&a, &b), &[90.0, 90.0], 1e-12);
        let c = DMatrix::from_row_slice(5, 2, &[1., 2., 0.5, -1., 0.25, 0., 2., 1.5, -1., 0.5]);
        let d = DMatrix::from_row_slice(
            5,
            3,
            &[
                1.1, 1.9, 0.3, 0.4, -1.2, 1.0, 0.2, 0.1, 0.0, 2.1, 1.4, -0.5, -0.9, 0.6, 0.2,
            ],
        );
        close(&principal_angles(&c, &d), &[4.14561418, 1.02762672], 1e-8);
        close(&principal_angles(&c, &c), &[0.0, 0.0], 1e-12);
        let e = DMatrix::from_row_slice(3, 1, &[1.0, 1e-9, 0.0]);
        let f = DMatrix::from_row_slice(3, 1, &[1.0, 0.0, 0.0]);
        close(&principal_angles(&e, &f), &[5.72957795e-08], 1e-15);
    }
}
