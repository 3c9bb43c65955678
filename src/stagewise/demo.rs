//! `tangency demo --control`: a receding-horizon loop on a plant model of our own, a
//! two-mass spring-damper chain.
//!
//! **An illustration of the mathematics, not a control design tool**: a real controller
//! needs input limits, state estimation, robustness and stability analysis, and is
//! designed and validated to the applicable codes by qualified engineers.
//!
//! Plant (our own numbers): masses m₁ = 1, m₂ = 0.5; a spring k₁ = 4 and damper c₁ = 0.3
//! from the wall to mass 1, a spring k₂ = 2 and damper c₂ = 0.2 between the masses; one
//! force on each mass. State `x = [p₁, v₁, p₂, v₂]`, sampled with zero-order hold at
//! `dt = 0.1`. Every step the controller factors nothing: it changes the initial state
//! (the first `nx` entries of `b`) and the linear terms that encode the reference preview,
//! and calls [`Factorization::solve_into`] with a reusable workspace.

use std::fmt::Write as _;
use std::time::Instant;

use faer::Mat;

use super::{HorizonBuilder, StageVectors};
use crate::error::Result;
use crate::solution::Solution;
use crate::solver::{Factorization, Method, Options, Plan};

const K1: f64 = 4.0;
const K2: f64 = 2.0;
const C1: f64 = 0.3;
const C2: f64 = 0.2;
const M1: f64 = 1.0;
const M2: f64 = 0.5;

/// The continuous-time model `ẋ = A_c x + B_c u` of the chain.
fn continuous() -> (Mat<f64>, Mat<f64>) {
    let mut a = Mat::zeros(4, 4);
    a[(0, 1)] = 1.0;
    a[(1, 0)] = -(K1 + K2) / M1;
    a[(1, 1)] = -(C1 + C2) / M1;
    a[(1, 2)] = K2 / M1;
    a[(1, 3)] = C2 / M1;
    a[(2, 3)] = 1.0;
    a[(3, 0)] = K2 / M2;
    a[(3, 1)] = C2 / M2;
    a[(3, 2)] = -K2 / M2;
    a[(3, 3)] = -C2 / M2;
    let mut b = Mat::zeros(4, 2);
    b[(1, 0)] = 1.0 / M1;
    b[(3, 1)] = 1.0 / M2;
    (a, b)
}

/// Matrix exponential by scaling and squaring with a degree-18 Taylor polynomial (written
/// by hand: faer has no matrix exponential; for the 6×6 matrices here, with the norm scaled
/// below 1/2, the truncation error is far below rounding).
fn expm(m: &Mat<f64>) -> Mat<f64> {
    let n = m.nrows();
    let norm = (0..n)
        .map(|i| (0..n).map(|j| m[(i, j)].abs()).sum::<f64>())
        .fold(0.0f64, f64::max);
    let mut squarings = 0;
    let mut scale = 1.0;
    while norm * scale > 0.5 {
        scale *= 0.5;
        squarings += 1;
    }
    let a = Mat::from_fn(n, n, |i, j| m[(i, j)] * scale);
    let mut result = Mat::<f64>::identity(n, n);
    let mut term = Mat::<f64>::identity(n, n);
    for k in 1..=18 {
        term = &term * &a * (1.0 / k as f64);
        result += &term;
    }
    for _ in 0..squarings {
        result = &result * &result;
    }
    result
}

/// The zero-order-hold discretization `(A, B)` of the two-mass chain with sample time
/// `dt` (from the exponential of the augmented matrix `[[A_c, B_c], [0, 0]]·dt`).
pub fn two_mass_plant(dt: f64) -> (Mat<f64>, Mat<f64>) {
    let (ac, bc) = continuous();
    let aug = Mat::from_fn(6, 6, |i, j| match (i < 4, j < 4) {
        (true, true) => ac[(i, j)] * dt,
        (true, false) => bc[(i, j - 4)] * dt,
        _ => 0.0,
    });
    let e = expm(&aug);
    (
        Mat::from_fn(4, 4, |i, j| e[(i, j)]),
        Mat::from_fn(4, 2, |i, j| e[(i, j + 4)]),
    )
}

/// Reference position of mass 2 at step `t`: a square wave of our own (±0.5 every 8 s).
fn reference(t: usize) -> f64 {
    if (t / 80) % 2 == 0 {
        0.5
    } else {
        -0.5
    }
}

/// Steady state holding mass 2 at `r` and mass 1 at `r/2`, and the forces that hold it.
fn target(r: f64) -> ([f64; 4], [f64; 2]) {
    let (p1, p2) = (0.5 * r, r);
    let u1 = K1 * p1 - K2 * (p2 - p1);
    let u2 = K2 * (p2 - p1);
    ([p1, 0.0, p2, 0.0], [u1, u2])
}

/// Summary of one closed-loop run.
#[derive(Clone, Debug)]
pub struct ControlRun {
    /// Position of mass 2 after each step.
    pub position: Vec<f64>,
    /// Reference of mass 2 at each step.
    pub reference: Vec<f64>,
    /// Seconds spent in each re-solve.
    pub solve_seconds: Vec<f64>,
    /// Seconds of the one factorization.
    pub factor_seconds: f64,
    /// The readable log.
    pub log: String,
}

/// Runs `steps` receding-horizon steps with a horizon of `horizon` stages.
pub fn run_loop(steps: usize, horizon: usize) -> Result<ControlRun> {
    let dt = 0.1;
    let (a, b) = two_mass_plant(dt);
    let q = Mat::from_fn(4, 4, |i, j| {
        if i != j {
            0.0
        } else if i % 2 == 0 {
            10.0
        } else {
            1.0
        }
    });
    let r = Mat::from_fn(2, 2, |i, j| if i == j { 0.1 } else { 0.0 });
    let qn = Mat::from_fn(4, 4, |i, j| 10.0 * q[(i, j)]);
    let h = HorizonBuilder::new(4, 2, horizon)
        .dynamics(a.as_ref(), b.as_ref())
        .cost(q.as_ref(), r.as_ref())
        .terminal_cost(qn.as_ref())
        .build()?;
    let dims = h.dims();
    let problem = h.to_problem()?;
    let opts = Options {
        method: Method::Riccati,
        stages: Some(dims),
        ..Default::default()
    };
    let t0 = Instant::now();
    let f: Factorization = Plan::analyze(&problem, &opts)?.factor(&problem)?;
    let factor_seconds = t0.elapsed().as_secs_f64();
    let mut ws = f.workspace();
    let mut sol = Solution::empty(problem.n(), problem.m(), f.plan().method());
    // The per-step data (initial state, reference preview) written by stage.
    let mut data = StageVectors::new(&h);
    let mut x = [0.0f64; 4];
    let mut run = ControlRun {
        position: Vec::with_capacity(steps),
        reference: Vec::with_capacity(steps),
        solve_seconds: Vec::with_capacity(steps),
        factor_seconds,
        log: String::new(),
    };
    let _ = writeln!(
        run.log,
        "  step   time   ref p2     p1       p2     |error|   u1       u2      solve µs"
    );
    for t in 0..steps {
        // Reference preview over the horizon: each stage tracks the target of its time.
        for k in 0..=horizon {
            let (xr, ur) = target(reference(t + k));
            data.track(k, &xr, (k < horizon).then_some(&ur[..]))?;
        }
        data.set_initial_state(&x)?;
        let ts = Instant::now();
        f.solve_into(data.linear(), data.rhs(), &mut ws, &mut sol)?;
        let secs = ts.elapsed().as_secs_f64();
        let u0 = dims.input(&sol.x, 0);
        let u = [u0[0], u0[1]];
        // A force pulse of our own on mass 1 (steps 120–129) that the model does not know.
        let gust = if (120..130).contains(&t) { 1.0 } else { 0.0 };
        let mut next = [0.0f64; 4];
        for i in 0..4 {
            next[i] = (0..4).map(|j| a[(i, j)] * x[j]).sum::<f64>() + b[(i, 0)] * (u[0] + gust) + b[(i, 1)] * u[1];
        }
        x = next;
        run.position.push(x[2]);
        run.reference.push(reference(t + 1));
        run.solve_seconds.push(secs);
        if t % 10 == 9 || t == 0 {
            let _ = writeln!(
                run.log,
                "  {:>4}  {:>5.1}  {:>+6.3}  {:>+8.4} {:>+8.4}  {:>8.2e}  {:>+7.3}  {:>+7.3}  {:>7.1}",
                t + 1,
                (t + 1) as f64 * dt,
                reference(t + 1),
                x[0],
                x[2],
                (x[2] - reference(t + 1)).abs(),
                u[0],
                u[1],
                secs * 1e6
            );
        }
    }
    Ok(run)
}

/// Runs the 200-step demo and returns its explanation.
pub fn run() -> Result<String> {
    let horizon = 40;
    let steps = 200;
    let run = run_loop(steps, horizon)?;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "Demo: receding-horizon tracking on a two-mass spring-damper chain of our own\n\
         (m1 = 1, m2 = 0.5, k1 = 4, k2 = 2, c1 = 0.3, c2 = 0.2, dt = 0.1 s; a force on each mass).\n\
         Mass 2 follows a ±0.5 square wave (period 16 s), mass 1 half of it; a force pulse of 1 N\n\
         that the model does not know hits mass 1 during steps 121–130.\n\
         (An illustration of the mathematics, not a control design tool.)\n"
    );
    let _ = writeln!(
        out,
        "Horizon N = {horizon} stages (n = {} variables, m = {} constraints), factored once by the\n\
         Riccati recursion in {:.1} µs; each of the {steps} steps re-solves for the new measured state and\n\
         the shifted reference preview with one backward-forward sweep (no refactorization).\n",
        (horizon + 1) * 4 + horizon * 2,
        (horizon + 1) * 4,
        run.factor_seconds * 1e6
    );
    out.push_str(&run.log);
    let errors: Vec<f64> = run.position.iter().zip(&run.reference).map(|(p, r)| p - r).collect();
    let rms = (errors.iter().map(|e| e * e).sum::<f64>() / errors.len() as f64).sqrt();
    let max_abs = |r: std::ops::Range<usize>| errors[r].iter().fold(0.0f64, |a, e| a.max(e.abs()));
    // Settled window (steps 31–55: after the first transient, before the preview of the next
    // jump enters the horizon) and the window of the unmodelled pulse (steps 121–145).
    let settled = max_abs(30..55);
    let pulse = max_abs(120..145);
    let mut times = run.solve_seconds.clone();
    times.sort_by(f64::total_cmp);
    let median = times[times.len() / 2];
    let max = times[times.len() - 1];
    let _ = writeln!(
        out,
        "\nTracking error of mass 2: RMS {rms:.4} over all steps (the square-wave jumps dominate),\n\
         largest {settled:.2e} over steps 31–55 (settled), largest {pulse:.2e} over steps 121–145 (the unmodelled\n\
         pulse; the loop has no integral action, so a persistent unmodelled force would leave an offset).\n\
         The controller moves before each jump because the reference preview enters the horizon.\n\
         Re-solve time per step: median {:.1} µs, largest {:.1} µs (includes refinement and the certificate).",
        median * 1e6,
        max * 1e6
    );
    out.push_str(&crate::inequality::demo::run_limited(40, 30)?);
    Ok(out)
}
