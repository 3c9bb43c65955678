//! Every bad-input path of the builder: each is a typed error naming block and position.

use faer::Mat;
use nalgebra_sparse::CooMatrix;
use tangency::{Block, Error, ProblemBuilder, Triangle};

fn id2() -> [f64; 4] {
    [1.0, 0.0, 0.0, 1.0]
}

#[test]
fn non_square_hessian() {
    let h = Mat::<f64>::zeros(2, 3);
    let e = ProblemBuilder::new()
        .hessian_dense(h.as_ref(), Triangle::Full)
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::DimensionMismatch {
                block: Block::H,
                rows: 2,
                cols: 3,
                ..
            }
        ),
        "{e}"
    );
}

#[test]
fn row_major_wrong_length() {
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &[1.0, 2.0, 3.0], Triangle::Full)
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::WrongLength {
                block: Block::H,
                len: 3,
                expected: 4,
                ..
            }
        ),
        "{e}"
    );
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .constraints_row_major(1, 2, &[1.0])
        .build()
        .unwrap_err();
    assert!(matches!(e, Error::WrongLength { block: Block::A, .. }), "{e}");
}

#[test]
fn constraint_columns_must_match() {
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .constraints_triplets(1, 3, &[(0, 2, 1.0)])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::DimensionMismatch {
                block: Block::A,
                cols: 3,
                expected_cols: 2,
                ..
            }
        ),
        "{e}"
    );
    assert!(e.to_string().contains("block A"));
}

#[test]
fn vector_lengths() {
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .linear(&[1.0])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::DimensionMismatch {
                block: Block::C,
                rows: 1,
                expected_rows: 2,
                ..
            }
        ),
        "{e}"
    );
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .constraints_row_major(1, 2, &[1.0, 1.0])
        .rhs(&[1.0, 2.0])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::DimensionMismatch {
                block: Block::B,
                rows: 2,
                expected_rows: 1,
                ..
            }
        ),
        "{e}"
    );
}

#[test]
fn non_finite_values_name_block_row_col() {
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &[1.0, 0.0, 0.0, f64::NAN], Triangle::Full)
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::NonFinite {
                block: Block::H,
                row: 1,
                col: 1,
                ..
            }
        ),
        "{e}"
    );
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .constraints_triplets(2, 2, &[(1, 0, f64::INFINITY)])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::NonFinite {
                block: Block::A,
                row: 1,
                col: 0,
                ..
            }
        ),
        "{e}"
    );
    assert!(e.to_string().contains("row 1, column 0"));
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .linear(&[0.0, f64::NEG_INFINITY])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::NonFinite {
                block: Block::C,
                row: 1,
                ..
            }
        ),
        "{e}"
    );
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .constraints_row_major(1, 2, &[1.0, 1.0])
        .rhs(&[f64::NAN])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::NonFinite {
                block: Block::B,
                row: 0,
                ..
            }
        ),
        "{e}"
    );
}

#[test]
fn ignored_triangle_may_hold_anything_in_dense_input() {
    // Dense input with one triangle declared: the other triangle is not read, NaN included.
    let p = ProblemBuilder::new()
        .hessian_row_major(2, &[2.0, f64::NAN, 1.0, 2.0], Triangle::Lower)
        .build()
        .unwrap();
    assert_eq!(p.hessian().to_dense()[(0, 1)], 1.0);
}

#[test]
fn asymmetric_full_hessian_reports_worst_pair() {
    let h = [1.0, 0.5, 0.0, 0.5, 1.0, 0.25, 0.0, 0.3, 1.0];
    let e = ProblemBuilder::new()
        .hessian_row_major(3, &h, Triangle::Full)
        .build()
        .unwrap_err();
    match e {
        Error::NotSymmetric {
            row, col, upper, lower, ..
        } => {
            assert_eq!((row, col), (1, 2));
            assert_eq!((upper, lower), (0.25, 0.3));
        }
        other => panic!("{other}"),
    }
    // The same for sparse input, including a missing mirror entry.
    let e = ProblemBuilder::new()
        .hessian_triplets(3, &[(0, 0, 1.0), (2, 0, 0.7)], Triangle::Full)
        .build()
        .unwrap_err();
    assert!(matches!(e, Error::NotSymmetric { row: 0, col: 2, .. }), "{e}");
}

#[test]
fn symmetric_within_tolerance_is_averaged() {
    let h = [2.0, 1.0, 1.0 + 1e-14, 2.0];
    let p = ProblemBuilder::new()
        .hessian_row_major(2, &h, Triangle::Full)
        .build()
        .unwrap();
    let d = p.hessian().to_dense();
    assert_eq!(d[(0, 1)], d[(1, 0)]);
}

#[test]
fn out_of_range_and_wrong_triangle() {
    let e = ProblemBuilder::new()
        .hessian_triplets(2, &[(0, 0, 1.0), (1, 5, 1.0)], Triangle::Full)
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::IndexOutOfRange {
                block: Block::H,
                row: 1,
                col: 5,
                nrows: 2,
                ncols: 2
            }
        ),
        "{e}"
    );
    let e = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .constraints_triplets(1, 2, &[(3, 0, 1.0)])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::IndexOutOfRange {
                block: Block::A,
                row: 3,
                col: 0,
                ..
            }
        ),
        "{e}"
    );
    let e = ProblemBuilder::new()
        .hessian_triplets(2, &[(0, 0, 1.0), (0, 1, 1.0)], Triangle::Lower)
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::WrongTriangle {
                triangle: "lower",
                row: 0,
                col: 1
            }
        ),
        "{e}"
    );
    let e = ProblemBuilder::new()
        .hessian_triplets(2, &[(1, 0, 1.0)], Triangle::Upper)
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::WrongTriangle {
                triangle: "upper",
                row: 1,
                col: 0
            }
        ),
        "{e}"
    );
}

#[test]
fn duplicates_are_summed() {
    let mut coo = CooMatrix::new(2, 2);
    coo.push(0, 0, 1.0);
    coo.push(0, 0, 2.0);
    coo.push(1, 1, 4.0);
    let p = ProblemBuilder::new()
        .hessian_coo(&coo, Triangle::Lower)
        .build()
        .unwrap();
    assert_eq!(p.hessian().to_dense()[(0, 0)], 3.0);
}

#[test]
fn zero_sized_problem_is_valid() {
    let p = ProblemBuilder::new()
        .hessian_row_major(0, &[], Triangle::Full)
        .build()
        .unwrap();
    assert_eq!((p.n(), p.m()), (0, 0));
    let s = tangency::solve(&p, &Default::default()).unwrap();
    assert!(s.x.is_empty() && s.y.is_empty());
}

#[test]
fn replacing_vectors_is_checked() {
    let mut p = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .build()
        .unwrap();
    assert!(matches!(
        p.set_linear(&[1.0]),
        Err(Error::DimensionMismatch { block: Block::C, .. })
    ));
    assert!(matches!(
        p.set_rhs(&[1.0]),
        Err(Error::DimensionMismatch { block: Block::B, .. })
    ));
    assert!(p.set_linear(&[1.0, f64::NAN]).is_err());
}

#[test]
fn solve_with_checks_lengths_and_finiteness() {
    let p = ProblemBuilder::new()
        .hessian_row_major(2, &id2(), Triangle::Full)
        .build()
        .unwrap();
    let plan = tangency::Plan::analyze(&p, &Default::default()).unwrap();
    let f = plan.factor(&p).unwrap();
    assert!(matches!(
        f.solve_with(&[1.0], &[]),
        Err(Error::DimensionMismatch { block: Block::C, .. })
    ));
    assert!(matches!(
        f.solve_with(&[1.0, f64::NAN], &[]),
        Err(Error::NonFinite {
            block: Block::C,
            row: 1,
            ..
        })
    ));
}
