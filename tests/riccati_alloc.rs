//! The control-loop re-solve allocates nothing: a counting global allocator watches
//! `Factorization::solve_into` with a reused workspace and solution while the initial
//! state and the linear terms change (new x̂, qₖ, rₖ, cₖ).

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::sync::atomic::{AtomicUsize, Ordering};

use faer::Mat;
use tangency::stagewise::HorizonBuilder;
use tangency::{Method, Options, Plan, Solution};

struct Counting;

static ALLOCATIONS: AtomicUsize = AtomicUsize::new(0);
thread_local! {
    static WATCH: Cell<bool> = const { Cell::new(false) };
}

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if WATCH.with(|w| w.get()) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        if WATCH.with(|w| w.get()) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

#[test]
fn resolve_does_not_allocate() {
    let (nx, nu, n) = (6, 2, 30);
    let a = Mat::from_fn(nx, nx, |i, j| {
        if i == j {
            0.98
        } else if j == i + 1 {
            0.1
        } else {
            0.0
        }
    });
    let b = Mat::from_fn(nx, nu, |i, j| if i % nu == j { 0.1 } else { 0.01 });
    let q = Mat::<f64>::identity(nx, nx);
    let r = Mat::from_fn(nu, nu, |i, j| if i == j { 0.5 } else { 0.0 });
    let s = Mat::from_fn(nu, nx, |i, j| 0.01 * (i + j) as f64);
    let e = Mat::from_fn(1, nu, |_, j| 1.0 + j as f64);
    let d = Mat::from_fn(1, nx, |_, j| 0.1 * j as f64);
    let h = HorizonBuilder::new(nx, nu, n)
        .dynamics(a.as_ref(), b.as_ref())
        .cost(q.as_ref(), r.as_ref())
        .cross_weight(s.as_ref())
        .stage_input_constraint(3, e.as_ref(), d.as_ref(), &[0.2])
        .terminal_cost(q.as_ref())
        .build()
        .unwrap();
    let p = h.to_problem().unwrap();
    let opts = Options {
        method: Method::Riccati,
        stages: Some(h.dims()),
        ..Default::default()
    };
    let f = Plan::analyze(&p, &opts).unwrap().factor(&p).unwrap();
    let mut ws = f.workspace();
    let mut out = Solution::empty(p.n(), p.m(), f.plan().method());
    let mut c = p.linear().to_vec();
    let mut bv = p.rhs().to_vec();
    f.solve_into(&c, &bv, &mut ws, &mut out).unwrap(); // warm-up (nothing should be lazy, but be fair)
    ALLOCATIONS.store(0, Ordering::Relaxed);
    let mut checks = 0.0;
    for step in 0..50 {
        for (i, v) in bv[..nx].iter_mut().enumerate() {
            *v = ((step * 7 + i) % 11) as f64 * 0.1 - 0.5;
        }
        for (i, v) in c.iter_mut().enumerate() {
            *v = ((step + i) % 5) as f64 * 0.01;
        }
        bv[nx] = 0.01 * step as f64; // c_0
        WATCH.with(|w| w.set(true));
        let res = f.solve_into(&c, &bv, &mut ws, &mut out);
        WATCH.with(|w| w.set(false));
        res.unwrap();
        checks += out.x[0];
        assert!(out.primal_residual < 1e-12 && out.dual_residual < 1e-12);
        assert_eq!(out.x[..nx], bv[..nx]);
    }
    assert!(checks.is_finite());
    assert_eq!(ALLOCATIONS.load(Ordering::Relaxed), 0, "solve_into allocated");
    // The counter does see allocations: the convenience path allocates a workspace.
    WATCH.with(|w| w.set(true));
    let s = f.solve_with(&c, &bv);
    WATCH.with(|w| w.set(false));
    assert!(s.is_ok());
    assert!(ALLOCATIONS.load(Ordering::Relaxed) > 0);
}
