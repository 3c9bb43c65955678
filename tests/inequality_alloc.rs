//! The control-loop re-solve of the inequality solver (warm start, verdict off, Riccati
//! steps) performs no heap allocation in the steady state: a counting global allocator
//! observes every allocation of this test process.

use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use tangency::inequality::stagewise::boxed_horizon;
use tangency::inequality::{shift_stages, InteriorPoint, InteriorPointOptions};
use tangency::{Method, MethodUsed, Options};

struct Counting;

static COUNTING: AtomicBool = AtomicBool::new(false);
static ALLOCATIONS: AtomicUsize = AtomicUsize::new(0);

thread_local! {
    // Only the test's own thread is counted: the harness's other threads (output capture,
    // timeout watch) were seen to allocate under load.
    static THIS_THREAD: std::cell::Cell<bool> = const { std::cell::Cell::new(false) };
}

fn counted() -> bool {
    COUNTING.load(Ordering::SeqCst) && THIS_THREAD.with(|t| t.get())
}

// SAFETY: forwards every call unchanged to the system allocator; only counts.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if counted() {
            ALLOCATIONS.fetch_add(1, Ordering::SeqCst);
        }
        System.alloc(layout)
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        System.dealloc(ptr, layout)
    }
    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        if counted() {
            ALLOCATIONS.fetch_add(1, Ordering::SeqCst);
        }
        System.alloc_zeroed(layout)
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        if counted() {
            ALLOCATIONS.fetch_add(1, Ordering::SeqCst);
        }
        System.realloc(ptr, layout, new_size)
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

#[test]
fn warm_started_control_loop_allocates_nothing() {
    let (nx, nu, horizon) = (4usize, 2usize, 20usize);
    let mut bh = boxed_horizon(nx, nu, horizon, 0.3, 3.0, 21).unwrap();
    let dims = bh.dims;
    let opts = InteriorPointOptions {
        kkt: Options {
            method: Method::Riccati,
            stages: Some(dims),
            ..Default::default()
        },
        verdict: false,
        ..Default::default()
    };
    let mut ipm = InteriorPoint::new(&bh.problem, &opts).unwrap();
    assert_eq!(ipm.method(), MethodUsed::Riccati);
    let mut sol = ipm.empty_solution(&bh.problem);
    let mut warm = ipm.empty_solution(&bh.problem);
    let mut x = vec![0.0; nx];
    x.copy_from_slice(&bh.problem.equality_problem().rhs()[..nx]);
    let mut next = vec![0.0; nx];
    let (mut counted, mut rounds) = (0, 0);
    for t in 0..12 {
        if t == 4 {
            ALLOCATIONS.store(0, Ordering::SeqCst);
            THIS_THREAD.with(|t| t.set(true));
            COUNTING.store(true, Ordering::SeqCst);
        }
        bh.problem.set_rhs_range(0, &x).unwrap();
        ipm.solve_into(&bh.problem, (t > 0).then_some(&warm), &mut sol).unwrap();
        // x ← A x + B u₀ without allocating.
        for (i, ni) in next.iter_mut().enumerate() {
            *ni = (0..nx).map(|j| bh.a[(i, j)] * x[j]).sum::<f64>()
                + (0..nu).map(|j| bh.b[(i, j)] * sol.x[nx + j]).sum::<f64>();
        }
        x.copy_from_slice(&next);
        warm.x.copy_from_slice(&sol.x);
        warm.y.copy_from_slice(&sol.y);
        warm.z.copy_from_slice(&sol.z);
        warm.w.copy_from_slice(&sol.w);
        shift_stages(&mut warm, dims);
        if t >= 4 {
            rounds += 1;
            counted += sol.iterations;
        }
    }
    COUNTING.store(false, Ordering::SeqCst);
    let allocations = ALLOCATIONS.load(Ordering::SeqCst);
    assert_eq!(rounds, 8);
    assert!(counted > 0);
    assert!(sol.notes.is_empty());
    assert_eq!(
        allocations,
        0,
        "{allocations} allocation(s) in {rounds} warm re-solves ({counted} iterations, {} noted steps)",
        ipm.noted_steps()
    );
}
