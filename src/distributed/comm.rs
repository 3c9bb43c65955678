//! Small collective helpers on top of the `mpi` crate: agreement on failures, broadcasts of
//! strings and vectors, sums. Everything here is collective.

use mpi::collective::SystemOperation;
use mpi::topology::SimpleCommunicator;
use mpi::traits::*;

use crate::error::{Error, Result};

/// The rank that holds centralized data (MUMPS's host).
pub(crate) const ROOT: i32 = 0;

/// Broadcasts a string from `root`.
pub(crate) fn broadcast_string(comm: &SimpleCommunicator, root: i32, s: &str) -> String {
    let mut len = s.len() as u64;
    comm.process_at_rank(root).broadcast_into(&mut len);
    let mut bytes = if comm.rank() == root {
        s.as_bytes().to_vec()
    } else {
        vec![0u8; len as usize]
    };
    comm.process_at_rank(root).broadcast_into(&mut bytes[..]);
    String::from_utf8_lossy(&bytes).into_owned()
}

/// Broadcasts `v` (whose length every rank knows) from `root`.
pub(crate) fn broadcast_slice(comm: &SimpleCommunicator, root: i32, v: &mut [f64]) {
    if !v.is_empty() {
        comm.process_at_rank(root).broadcast_into(v);
    }
}

/// Broadcasts a vector whose length only `root` knows.
pub(crate) fn broadcast_vec(comm: &SimpleCommunicator, root: i32, v: &[f64]) -> Vec<f64> {
    let mut len = v.len() as u64;
    comm.process_at_rank(root).broadcast_into(&mut len);
    let mut out = if comm.rank() == root {
        v.to_vec()
    } else {
        vec![0.0; len as usize]
    };
    broadcast_slice(comm, root, &mut out);
    out
}

/// Element-wise sum over ranks into `out` (every rank gets the sum).
pub(crate) fn sum_into(comm: &SimpleCommunicator, local: &[f64], out: &mut [f64]) {
    if !local.is_empty() {
        comm.all_reduce_into(local, out, SystemOperation::sum());
    } else {
        out.iter_mut().for_each(|o| *o = 0.0);
    }
}

/// Sum of one count over ranks.
pub(crate) fn sum_count(comm: &SimpleCommunicator, local: u64) -> u64 {
    let mut out = 0u64;
    comm.all_reduce_into(&local, &mut out, SystemOperation::sum());
    out
}

/// Makes a local outcome collective: if any rank failed, every rank returns an error. The
/// lowest failing rank returns its own error; the others get [`Error::OnOtherRank`] with its
/// status, exit code and message.
pub(crate) fn agree<T>(comm: &SimpleCommunicator, local: Result<T>) -> Result<T> {
    let size = comm.size();
    let mine = if local.is_err() { comm.rank() } else { size };
    let mut first = size;
    comm.all_reduce_into(&mine, &mut first, SystemOperation::min());
    if first == size {
        return local;
    }
    let (mut code, message) = match &local {
        Err(e) if comm.rank() == first => (exit_code(e), e.to_string()),
        _ => (0u8, String::new()),
    };
    comm.process_at_rank(first).broadcast_into(&mut code);
    let status = match &local {
        Err(e) if comm.rank() == first => e.status().to_string(),
        _ => String::new(),
    };
    let status = broadcast_string(comm, first, &status);
    let message = broadcast_string(comm, first, &message);
    if comm.rank() == first {
        return local;
    }
    Err(Error::OnOtherRank {
        rank: first,
        status: static_status(&status),
        exit_code: code,
        message,
    })
}

/// The command-line exit code of an error (2 invalid input, 3 no solution, 4 not converged).
pub(crate) fn exit_code(e: &Error) -> u8 {
    if e.is_no_solution() {
        3
    } else if e.is_not_converged() {
        4
    } else {
        2
    }
}

fn static_status(s: &str) -> &'static str {
    match s {
        "singular" => "singular",
        "infeasible" => "infeasible",
        "unbounded" => "unbounded",
        "not_converged" => "not_converged",
        _ => "invalid_input",
    }
}

/// This process's peak resident memory in bytes (`VmHWM` of `/proc/self/status`), 0 when
/// it cannot be read.
pub(crate) fn peak_rss_bytes() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|t| {
            t.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|kb| kb.parse::<u64>().ok())
        })
        .map_or(0, |kb| kb * 1024)
}

/// Every rank's peak resident memory, gathered on every rank (index = rank).
pub(crate) fn peak_rss_all(comm: &SimpleCommunicator) -> Vec<u64> {
    let mine = peak_rss_bytes();
    let mut all = vec![0u64; comm.size() as usize];
    comm.all_gather_into(&mine, &mut all[..]);
    all
}
