//! [`Workspace`]: the reusable scratch memory of [`Factorization::solve_into`](crate::Factorization::solve_into).

use faer::dyn_stack::{MemBuffer, StackReq};
use faer::Mat;

use crate::error::{Error, Result};

/// Reusable scratch memory for [`Factorization::solve_into`]: the backend's solve scratch
/// (faer `MemBuffer`) plus a few vectors of length `n + m` and one of length `n`.
pub struct Workspace {
    n: usize,
    m: usize,
    pub(super) buf: MemBuffer,
    buf_bytes: usize,
    pub(super) rhs: Vec<f64>,
    pub(super) z: Vec<f64>,
    pub(super) r: Vec<f64>,
    pub(super) best: Vec<f64>,
    pub(super) col: Mat<f64>,
    pub(super) grad: Vec<f64>,
}

impl std::fmt::Debug for Workspace {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Workspace")
            .field("n", &self.n)
            .field("m", &self.m)
            .field("bytes", &self.memory_usage())
            .finish()
    }
}

impl Workspace {
    pub(super) fn new(n: usize, m: usize, req: StackReq) -> Self {
        let dim = n + m;
        Workspace {
            n,
            m,
            buf: MemBuffer::new(req),
            buf_bytes: req.size_bytes(),
            rhs: vec![0.0; dim],
            z: vec![0.0; dim],
            r: vec![0.0; dim],
            best: vec![0.0; dim],
            col: Mat::zeros(dim, 1),
            grad: vec![0.0; n],
        }
    }

    /// Bytes held by this workspace.
    pub fn memory_usage(&self) -> usize {
        self.buf_bytes + (5 * (self.n + self.m) + self.n) * std::mem::size_of::<f64>()
    }

    pub(super) fn reserve(&mut self, req: StackReq) {
        if req.size_bytes() > self.buf_bytes {
            self.buf = MemBuffer::new(req);
            self.buf_bytes = req.size_bytes();
        }
    }

    pub(super) fn check(&self, n: usize, m: usize) -> Result<()> {
        if (self.n, self.m) != (n, m) {
            return Err(Error::StructureChanged {
                detail: format!(
                    "the workspace is for n = {}, m = {}, not n = {n}, m = {m}",
                    self.n, self.m
                ),
            });
        }
        Ok(())
    }
}
