//! Validation of the horizon builder: every bad-input path names the stage, block, row
//! and column; the conversion has the documented layout.

use faer::{mat, Mat};
use tangency::stagewise::{HorizonBuilder, StageBlock};
use tangency::Error;

fn base() -> HorizonBuilder<tangency::stagewise::HasDynamics, tangency::stagewise::HasCost> {
    HorizonBuilder::new(2, 1, 4)
        .dynamics(mat![[1.0, 0.1], [0.0, 1.0]].as_ref(), mat![[0.0], [0.1]].as_ref())
        .cost(mat![[1.0, 0.0], [0.0, 1.0]].as_ref(), mat![[1.0]].as_ref())
}

fn stage_err(e: Error) -> (usize, StageBlock, Option<usize>, Option<usize>) {
    match e {
        Error::Stage {
            stage, block, row, col, ..
        } => (stage, block, row, col),
        other => panic!("unexpected {other:?}"),
    }
}

#[test]
fn wrong_shapes_are_named() {
    let e = base()
        .stage_dynamics(2, mat![[1.0]].as_ref(), mat![[0.0], [0.1]].as_ref())
        .build()
        .unwrap_err();
    assert_eq!(stage_err(e), (2, StageBlock::A, None, None));
    let e = base()
        .stage_dynamics(1, Mat::zeros(2, 2).as_ref(), Mat::zeros(2, 2).as_ref())
        .build()
        .unwrap_err();
    assert_eq!(stage_err(e), (1, StageBlock::B, None, None));
    let e = base().stage_offset(3, &[1.0]).build().unwrap_err();
    assert_eq!(stage_err(e), (3, StageBlock::Offset, None, None));
    let e = base()
        .stage_cross_weight(0, Mat::zeros(2, 1).as_ref())
        .build()
        .unwrap_err();
    assert_eq!(stage_err(e), (0, StageBlock::S, None, None));
    let e = base().stage_linear(1, &[0.0, 0.0], &[]).build().unwrap_err();
    assert_eq!(stage_err(e), (1, StageBlock::InputLinear, None, None));
    let e = base().terminal_cost(Mat::zeros(3, 3).as_ref()).build().unwrap_err();
    assert_eq!(stage_err(e), (4, StageBlock::TerminalQ, None, None));
    let e = base().initial_state(&[1.0]).build().unwrap_err();
    assert_eq!(stage_err(e), (4, StageBlock::InitialState, None, None));
    let e = base()
        .stage_cost(7, Mat::zeros(2, 2).as_ref(), Mat::zeros(1, 1).as_ref())
        .build()
        .unwrap_err();
    assert_eq!(stage_err(e), (7, StageBlock::Index, None, None));
}

#[test]
fn non_finite_and_asymmetric_values_are_located() {
    let e = base()
        .stage_dynamics(
            1,
            mat![[1.0, 0.1], [f64::NAN, 1.0]].as_ref(),
            mat![[0.0], [0.1]].as_ref(),
        )
        .build()
        .unwrap_err();
    assert_eq!(stage_err(e), (1, StageBlock::A, Some(1), Some(0)));
    let e = base()
        .stage_linear(2, &[0.0, f64::INFINITY], &[0.0])
        .build()
        .unwrap_err();
    assert_eq!(stage_err(e), (2, StageBlock::StateLinear, Some(1), Some(0)));
    let e = base()
        .stage_cost(3, mat![[1.0, 0.2], [0.1, 1.0]].as_ref(), mat![[1.0]].as_ref())
        .build()
        .unwrap_err();
    let text = e.to_string();
    assert_eq!(stage_err(e), (3, StageBlock::Q, Some(0), Some(1)));
    assert!(
        text.contains("horizon stage 3") && text.contains("not symmetric"),
        "{text}"
    );
    // Within the tolerance the block is symmetrized.
    assert!(base()
        .stage_cost(3, mat![[1.0, 0.2], [0.2 + 1e-14, 1.0]].as_ref(), mat![[1.0]].as_ref())
        .build()
        .is_ok());
}

#[test]
fn input_constraints_need_full_row_rank() {
    // Two rows on one input.
    let e = base()
        .stage_input_constraint(1, mat![[1.0], [2.0]].as_ref(), Mat::zeros(2, 2).as_ref(), &[0.0, 0.0])
        .build()
        .unwrap_err();
    assert_eq!(stage_err(e), (1, StageBlock::E, None, None));
    // A zero row of E (a state-only constraint) is rank deficient.
    let e = base()
        .stage_input_constraint(2, mat![[0.0]].as_ref(), mat![[1.0, 0.0]].as_ref(), &[0.0])
        .build()
        .unwrap_err();
    let text = e.to_string();
    assert_eq!(stage_err(e), (2, StageBlock::E, None, None));
    assert!(text.contains("full row rank"), "{text}");
    let e = base()
        .input_constraint(mat![[1.0]].as_ref(), mat![[1.0, 0.0]].as_ref(), &[0.0, 1.0])
        .build()
        .unwrap_err();
    assert_eq!(stage_err(e), (0, StageBlock::ConstraintRhs, None, None));
}

#[test]
fn conversion_has_the_documented_layout() {
    let h = base()
        .stage_cross_weight(1, mat![[0.3, -0.2]].as_ref())
        .stage_linear(2, &[0.5, 0.6], &[0.7])
        .stage_offset(0, &[0.01, 0.02])
        .stage_input_constraint(1, mat![[2.0]].as_ref(), mat![[0.5, 0.25]].as_ref(), &[0.125])
        .terminal_cost(mat![[4.0, 1.0], [1.0, 3.0]].as_ref())
        .terminal_linear(&[0.9, 1.1])
        .initial_state(&[1.5, -0.5])
        .build()
        .unwrap();
    let p = h.to_problem().unwrap();
    let d = h.dims();
    assert_eq!((p.n(), p.m()), (5 * 2 + 4, 5 * 2 + 1));
    let hd = p.hessian().to_dense();
    let ad = p.constraints().to_dense();
    // S_1 at (u_1, x_1) and its mirror.
    assert_eq!(hd[(d.u_offset(1), d.x_offset(1) + 1)], -0.2);
    assert_eq!(hd[(d.x_offset(1) + 1, d.u_offset(1))], -0.2);
    assert_eq!(hd[(d.x_offset(4), d.x_offset(4) + 1)], 1.0);
    assert_eq!(p.linear()[d.u_offset(2)], 0.7);
    assert_eq!(p.linear()[d.x_offset(4) + 1], 1.1);
    // Rows: x_0 = x̂, then x_1 − A x_0 − B u_0 = c_0.
    assert_eq!(p.rhs()[..2], [1.5, -0.5]);
    assert_eq!(ad[(2, d.x_offset(1))], 1.0);
    assert_eq!(ad[(2, d.x_offset(0) + 1)], -0.1);
    assert_eq!(ad[(3, d.u_offset(0))], -0.1);
    assert_eq!(p.rhs()[2..4], [0.01, 0.02]);
    // The input-constraint row comes after all dynamics rows.
    assert_eq!(ad[(10, d.u_offset(1))], 2.0);
    assert_eq!(ad[(10, d.x_offset(1) + 1)], 0.25);
    assert_eq!(p.rhs()[10], 0.125);
}
