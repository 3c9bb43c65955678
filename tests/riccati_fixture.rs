//! The Riccati recursion against the discrete algebraic Riccati equation solved by an
//! independent general-purpose library: tests/fixtures/lqr-two-mass.json holds the
//! stabilizing solution P computed with scipy.linalg.solve_discrete_are for a two-mass
//! spring-damper chain of our own, and K = (R + BᵀPB)⁻¹BᵀPA.

use faer::Mat;
use tangency::stagewise::{HorizonBuilder, RiccatiBackend};
use tangency::{Method, Options, Plan, Verdict};

const FIXTURE: &str = include_str!("fixtures/lqr-two-mass.json");

/// Minimal reader for the fixture: the value of `key` as a matrix (array of arrays).
fn matrix(text: &str, key: &str) -> Mat<f64> {
    let start = text.find(&format!("\"{key}\"")).expect("key present");
    let rest = &text[start..];
    let open = rest.find('[').expect("array");
    let mut depth = 0;
    let mut end = open;
    for (i, ch) in rest[open..].char_indices() {
        match ch {
            '[' => depth += 1,
            ']' => {
                depth -= 1;
                if depth == 0 {
                    end = open + i;
                    break;
                }
            }
            _ => {}
        }
    }
    let body = &rest[open + 1..end];
    let rows: Vec<Vec<f64>> = body
        .split(']')
        .filter(|r| r.contains('['))
        .map(|r| {
            r.trim_start_matches(|c: char| c == ',' || c.is_whitespace() || c == '[')
                .split(',')
                .map(|v| v.trim().parse::<f64>().expect("number"))
                .collect()
        })
        .collect();
    Mat::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
}

struct Fixture {
    a: Mat<f64>,
    b: Mat<f64>,
    q: Mat<f64>,
    r: Mat<f64>,
    p: Mat<f64>,
    k: Mat<f64>,
}

fn fixture() -> Fixture {
    let text = FIXTURE;
    Fixture {
        a: matrix(text, "A"),
        b: matrix(text, "B"),
        q: matrix(text, "Q"),
        r: matrix(text, "R"),
        p: matrix(text, "P"),
        k: matrix(text, "K"),
    }
}

fn rel_diff(a: faer::MatRef<'_, f64>, b: faer::MatRef<'_, f64>, sign: f64) -> f64 {
    let mut num = 0.0f64;
    let mut den = 0.0f64;
    for j in 0..a.ncols() {
        for i in 0..a.nrows() {
            num = num.max((a[(i, j)] - sign * b[(i, j)]).abs());
            den = den.max(b[(i, j)].abs());
        }
    }
    num / den
}

fn factor(f: &Fixture, horizon: usize, terminal: Mat<f64>, x0: &[f64]) -> (tangency::Factorization, tangency::Problem) {
    let h = HorizonBuilder::new(4, 2, horizon)
        .dynamics(f.a.as_ref(), f.b.as_ref())
        .cost(f.q.as_ref(), f.r.as_ref())
        .terminal_cost(terminal.as_ref())
        .initial_state(x0)
        .build()
        .expect("valid horizon");
    let problem = h.to_problem().expect("conversion");
    let opts = Options {
        method: Method::Riccati,
        stages: Some(h.dims()),
        ..Default::default()
    };
    let plan = Plan::analyze(&problem, &opts).expect("analysis");
    (plan.factor(&problem).expect("factor"), problem)
}

fn ric(f: &tangency::Factorization) -> &RiccatiBackend {
    f.backend().riccati().expect("Riccati backend")
}

#[test]
fn terminal_cost_p_is_a_fixed_point() {
    let f = fixture();
    let (fac, _) = factor(&f, 25, f.p.clone(), &[1.0, 0.0, -0.5, 0.0]);
    let r = ric(&fac);
    for k in 0..=25 {
        let e = rel_diff(r.value_matrix(k), f.p.as_ref(), 1.0);
        assert!(e < 1e-10, "P_{k} differs from the DARE solution by {e:e}");
    }
    for k in 0..25 {
        // Our gain is u = K x, the fixture's u = −K x.
        let e = rel_diff(r.gain(k), f.k.as_ref(), -1.0);
        assert!(e < 1e-10, "K_{k} differs from the fixture gain by {e:e}");
    }
    // The optimal trajectory follows u = −K_lqr x and the objective is ½x̂ᵀPx̂.
    let s = fac.solve().expect("solve");
    assert_eq!(s.verdict, Some(Verdict::Minimizer));
    let x0 = [1.0, 0.0, -0.5, 0.0];
    let mut quad = 0.0;
    for i in 0..4 {
        for j in 0..4 {
            quad += 0.5 * x0[i] * f.p[(i, j)] * x0[j];
        }
    }
    assert!((s.objective - quad).abs() < 1e-10 * quad, "{} vs {quad}", s.objective);
    let w = 6;
    for k in 0..25 {
        for i in 0..2 {
            let u_lqr: f64 = -(0..4).map(|j| f.k[(i, j)] * s.x[k * w + j]).sum::<f64>();
            assert!((s.x[k * w + 4 + i] - u_lqr).abs() < 1e-10 * (1.0 + u_lqr.abs()));
        }
    }
    // Costate: y_0 = −P x̂, so ∂f*/∂x̂ = −y_0 = P x̂.
    for i in 0..4 {
        let px: f64 = (0..4).map(|j| f.p[(i, j)] * x0[j]).sum();
        assert!((s.y[i] + px).abs() < 1e-9 * (1.0 + px.abs()));
    }
}

#[test]
fn long_horizon_converges_to_the_dare_solution() {
    let f = fixture();
    let (fac, _) = factor(&f, 300, Mat::zeros(4, 4), &[0.3, 0.0, 0.0, 0.1]);
    let r = ric(&fac);
    let ep = rel_diff(r.value_matrix(0), f.p.as_ref(), 1.0);
    let ek = rel_diff(r.gain(0), f.k.as_ref(), -1.0);
    assert!(ep < 1e-8, "P_0 differs by {ep:e}");
    assert!(ek < 1e-8, "K_0 differs by {ek:e}");
    // Far from convergence near the end: P_{N-1} = Q + AᵀQ_N A − … is not P.
    assert!(rel_diff(r.value_matrix(299), f.p.as_ref(), 1.0) > 1e-2);
    let s = fac.solve().expect("solve");
    assert_eq!(s.verdict, Some(Verdict::Minimizer));
    assert!(s.backward_error < 1e-14);
}

#[test]
fn demo_plant_discretization_matches_the_fixture() {
    // The demo builds the same plant by its own zero-order-hold discretization; the fixture's
    // A and B come from scipy's matrix exponential.
    let f = fixture();
    let (a, b) = tangency::stagewise::demo::two_mass_plant(0.1);
    assert!(rel_diff(a.as_ref(), f.a.as_ref(), 1.0) < 1e-12);
    assert!(rel_diff(b.as_ref(), f.b.as_ref(), 1.0) < 1e-12);
}
