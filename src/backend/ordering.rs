//! Nested-dissection ordering of a symmetric pattern through METIS (Karypis & Kumar 1998,
//! "A fast and high quality multilevel scheme for partitioning irregular graphs"), the
//! candidate the sparse backend tries beside AMD (see [`super::sparse_ldlt`], "Ordering").
//!
//! METIS comes from the `metis-sys` crate (its bundled C sources, compiled by Cargo); the
//! `metis` wrapper crate does not expose `METIS_NodeND`, so the one call is made here
//! through the raw binding, the only `unsafe` of this module.

use crate::error::{Error, Result};

/// A fill-reducing permutation `(perm, perm_inv)` (`perm[new] = old`) of the graph whose
/// lower (or upper, or full) pattern is given in compressed columns (`col_ptr`, `row_idx`;
/// diagonal entries allowed and ignored), by METIS multilevel nested dissection with its
/// default options.
///
/// ```
/// use tangency::backend::ordering::nested_dissection;
/// // Path 0 – 1 – 2 – 3 – 4 (lower triangle with diagonal).
/// let col_ptr = [0, 2, 4, 6, 8, 9];
/// let row_idx = [0, 1, 1, 2, 2, 3, 3, 4, 4];
/// let (perm, perm_inv) = nested_dissection(5, &col_ptr, &row_idx)?;
/// let mut seen = perm.clone();
/// seen.sort();
/// assert_eq!(seen, [0, 1, 2, 3, 4]);
/// assert!((0..5).all(|i| perm[perm_inv[i]] == i));
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn nested_dissection(n: usize, col_ptr: &[usize], row_idx: &[usize]) -> Result<(Vec<usize>, Vec<usize>)> {
    let too_big = || Error::Resources {
        detail: format!("nested dissection of a graph with {n} nodes: beyond METIS's 32-bit indices"),
    };
    if col_ptr.len() != n + 1 || col_ptr[n] > row_idx.len() {
        return Err(Error::InvalidOption(format!(
            "nested dissection: a pattern of {n} columns needs {} column pointers",
            n + 1
        )));
    }
    if n == 0 {
        return Ok((Vec::new(), Vec::new()));
    }
    // Full adjacency without self loops (METIS's input), duplicates removed.
    let mut degree = vec![0usize; n + 1];
    for j in 0..n {
        for &i in &row_idx[col_ptr[j]..col_ptr[j + 1]] {
            if i != j && i < n {
                degree[i + 1] += 1;
                degree[j + 1] += 1;
            }
        }
    }
    for j in 0..n {
        degree[j + 1] += degree[j];
    }
    let edges = degree[n];
    if n > i32::MAX as usize || edges > i32::MAX as usize {
        return Err(too_big());
    }
    let mut fill = degree.clone();
    let mut adj = vec![0usize; edges];
    for j in 0..n {
        for &i in &row_idx[col_ptr[j]..col_ptr[j + 1]] {
            if i != j && i < n {
                adj[fill[i]] = j;
                fill[i] += 1;
                adj[fill[j]] = i;
                fill[j] += 1;
            }
        }
    }
    let mut xadj: Vec<i32> = Vec::with_capacity(n + 1);
    let mut adjncy: Vec<i32> = Vec::with_capacity(edges);
    xadj.push(0);
    for j in 0..n {
        let list = &mut adj[degree[j]..degree[j + 1]];
        list.sort_unstable();
        let mut last = usize::MAX;
        for &i in list.iter() {
            if i != last {
                adjncy.push(i as i32);
                last = i;
            }
        }
        xadj.push(adjncy.len() as i32);
    }
    let mut nvtxs = n as i32;
    let mut perm = vec![0i32; n];
    let mut iperm = vec![0i32; n];
    let mut options = [0i32; metis_sys::METIS_NOPTIONS as usize];
    // SAFETY: METIS reads `nvtxs + 1` entries of `xadj`, `xadj[nvtxs]` of `adjncy` (a valid
    // symmetric graph without self loops, built above) and `options` (METIS_NOPTIONS
    // entries); it writes `nvtxs` entries of `perm` and `iperm`. All buffers have those
    // lengths and outlive the calls; a null `vwgt` means unit weights.
    let status = unsafe {
        metis_sys::METIS_SetDefaultOptions(options.as_mut_ptr());
        metis_sys::METIS_NodeND(
            &mut nvtxs,
            xadj.as_mut_ptr(),
            adjncy.as_mut_ptr(),
            std::ptr::null_mut(),
            options.as_mut_ptr(),
            perm.as_mut_ptr(),
            iperm.as_mut_ptr(),
        )
    };
    if status != metis_sys::rstatus_et_METIS_OK {
        return Err(Error::Resources {
            detail: format!("METIS nested dissection of a graph with {n} nodes failed (status {status})"),
        });
    }
    // METIS manual (5.1, METIS_NodeND): row i of the permuted matrix is row perm[i] of the
    // original, so perm[new] = old as ours, and iperm is its inverse.
    let fwd: Vec<usize> = perm.iter().map(|&v| v as usize).collect();
    let inv: Vec<usize> = iperm.iter().map(|&v| v as usize).collect();
    if fwd.iter().any(|&v| v >= n) || inv.iter().any(|&v| v >= n) {
        return Err(Error::Resources {
            detail: format!("METIS returned an invalid permutation of {n} nodes"),
        });
    }
    Ok((fwd, inv))
}
