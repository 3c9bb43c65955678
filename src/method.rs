//! The method names: [`Method`] (what a caller asks for) and [`MethodUsed`] (what produced
//! a factorization or a solution), with one table of their command-line words.
//!
//! Every concrete method exists on both sides; [`Method::Auto`] only on the asking side.
//! The words are written once, in [`Method::as_str`]; [`MethodUsed::as_str`] and both
//! `FromStr` impls go through it, and the compiler checks every `match` on either enum
//! (adding a method points at each place that must learn about it).

use std::fmt;
use std::str::FromStr;

use crate::error::{Error, Result};

/// Which method to use for a solve.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Hash, Default)]
#[non_exhaustive]
pub enum Method {
    /// Let the analysis choose (the cost model of [`crate::backend::auto`]).
    #[default]
    Auto,
    /// Dense symmetric-indefinite LBLᵀ.
    Dense,
    /// Riccati recursion for stage-wise problems; needs [`Options::stages`](crate::Options::stages).
    Riccati,
    /// Schur complement (range space): Cholesky of `H` and of `A H⁻¹ Aᵀ`; falls back to
    /// dense LBLᵀ or null-space when `H` is not positive definite.
    Schur,
    /// Null-space: rank-revealing QR of `Aᵀ`, reduced Hessian `ZᵀHZ`.
    NullSpace,
    /// Sparse LDLᵀ (fill-reducing ordering, regularized pivots, refinement).
    Sparse,
    /// Preconditioned MINRES on K (iterative; inertia and verdict not observed). Through
    /// [`Plan`](crate::Plan) it uses the limits [`Options::iterative_tol`](crate::Options::iterative_tol)
    /// and [`Options::iterative_max_iter`](crate::Options::iterative_max_iter); the full
    /// driver with its own options is [`crate::iterative::minres()`].
    Minres,
    /// Projected conjugate gradients with a constraint preconditioner. It is a driver of its
    /// own ([`crate::iterative::pcg()`]), not a factorization: [`Plan::analyze`](crate::Plan::analyze)
    /// refuses it.
    Pcg,
    /// MUMPS on MPI ranks ([`crate::distributed`], feature `mpi`): a driver of its own, not
    /// a serial factorization; [`Plan::analyze`](crate::Plan::analyze) refuses it.
    #[cfg(feature = "mpi")]
    Distributed,
}

impl Method {
    /// The direct (factorization) methods, `auto` first: the list an unknown method name is
    /// answered with. The iterative and distributed words ([`Method::as_str`] of
    /// [`Method::Minres`], [`Method::Pcg`]) parse too.
    pub const NAMES: &'static [&'static str] = &["auto", "dense", "sparse", "schur", "nullspace", "riccati"];

    /// Every method, in the order of [`Method::NAMES`] followed by the iterative ones.
    pub const ALL: &'static [Method] = &[
        Method::Auto,
        Method::Dense,
        Method::Sparse,
        Method::Schur,
        Method::NullSpace,
        Method::Riccati,
        Method::Minres,
        Method::Pcg,
        #[cfg(feature = "mpi")]
        Method::Distributed,
    ];

    /// The word used by the command line (`--method`) and the JSON `method` keys: the one
    /// table of method words.
    pub fn as_str(self) -> &'static str {
        match self {
            Method::Auto => "auto",
            Method::Dense => "dense",
            Method::Riccati => "riccati",
            Method::Schur => "schur",
            Method::NullSpace => "nullspace",
            Method::Sparse => "sparse",
            Method::Minres => "minres",
            Method::Pcg => "pcg",
            #[cfg(feature = "mpi")]
            Method::Distributed => "distributed",
        }
    }

    /// The method that runs when this one is asked for; `None` for [`Method::Auto`] (the
    /// analysis decides).
    pub fn used(self) -> Option<MethodUsed> {
        Some(match self {
            Method::Auto => return None,
            Method::Dense => MethodUsed::DenseLblt,
            Method::Riccati => MethodUsed::Riccati,
            Method::Schur => MethodUsed::Schur,
            Method::NullSpace => MethodUsed::NullSpace,
            Method::Sparse => MethodUsed::SparseLdlt,
            Method::Minres => MethodUsed::Minres,
            Method::Pcg => MethodUsed::Pcg,
            #[cfg(feature = "mpi")]
            Method::Distributed => MethodUsed::Distributed,
        })
    }
}

impl fmt::Display for Method {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for Method {
    type Err = Error;
    fn from_str(s: &str) -> Result<Self> {
        Method::ALL.iter().copied().find(|m| m.as_str() == s).ok_or_else(|| {
            Error::InvalidOption(format!(
                "unknown method '{s}'; known methods: {}",
                Method::NAMES.join(", ")
            ))
        })
    }
}

/// Which method produced a factorization or a solution. With the `serde` feature it
/// serializes as its command-line word ([`MethodUsed::as_str`]).
#[derive(Copy, Clone, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
#[non_exhaustive]
pub enum MethodUsed {
    /// Dense symmetric-indefinite LBLᵀ (Bunch–Kaufman family).
    #[cfg_attr(feature = "serde", serde(rename = "dense"))]
    DenseLblt,
    /// Riccati recursion over the stages of a stage-wise (optimal control) problem.
    #[cfg_attr(feature = "serde", serde(rename = "riccati"))]
    Riccati,
    /// Range-space method: Cholesky of `H`, then of the Schur complement `A H⁻¹ Aᵀ`.
    #[cfg_attr(feature = "serde", serde(rename = "schur"))]
    Schur,
    /// Null-space method: rank-revealing QR of `Aᵀ`, reduced Hessian `ZᵀHZ`.
    #[cfg_attr(feature = "serde", serde(rename = "nullspace"))]
    NullSpace,
    /// Sparse LDLᵀ with a fill-reducing ordering and regularized pivots.
    #[cfg_attr(feature = "serde", serde(rename = "sparse"))]
    SparseLdlt,
    /// Preconditioned MINRES (iterative; inertia not observed), see [`crate::iterative`].
    #[cfg_attr(feature = "serde", serde(rename = "minres"))]
    Minres,
    /// Projected conjugate gradients with a constraint preconditioner (iterative; inertia
    /// not observed), see [`crate::iterative::pcg()`].
    #[cfg_attr(feature = "serde", serde(rename = "pcg"))]
    Pcg,
    /// MUMPS's distributed symmetric-indefinite factorization on MPI ranks, see
    /// [`crate::distributed`] (feature `mpi`).
    #[cfg(feature = "mpi")]
    #[cfg_attr(feature = "serde", serde(rename = "distributed"))]
    Distributed,
}

impl MethodUsed {
    /// The [`Method`] that asks for this one (the inverse of [`Method::used`]).
    pub fn requested(self) -> Method {
        match self {
            MethodUsed::DenseLblt => Method::Dense,
            MethodUsed::Riccati => Method::Riccati,
            MethodUsed::Schur => Method::Schur,
            MethodUsed::NullSpace => Method::NullSpace,
            MethodUsed::SparseLdlt => Method::Sparse,
            MethodUsed::Minres => Method::Minres,
            MethodUsed::Pcg => Method::Pcg,
            #[cfg(feature = "mpi")]
            MethodUsed::Distributed => Method::Distributed,
        }
    }

    /// The word used by the command line (that of [`MethodUsed::requested`]).
    pub fn as_str(self) -> &'static str {
        self.requested().as_str()
    }

    /// True for the iterative methods (accepted by residual, inertia not observed).
    pub fn is_iterative(self) -> bool {
        matches!(self, MethodUsed::Minres | MethodUsed::Pcg)
    }
}

impl fmt::Display for MethodUsed {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for MethodUsed {
    type Err = Error;
    /// Parses a method word; `auto` is not a method that ran and is refused.
    fn from_str(s: &str) -> Result<Self> {
        let method: Method = s.parse()?;
        method
            .used()
            .ok_or_else(|| Error::InvalidOption("'auto' names a choice, not a method that ran".to_string()))
    }
}

impl From<MethodUsed> for Method {
    fn from(m: MethodUsed) -> Method {
        m.requested()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn words_round_trip_on_both_sides() {
        for &m in Method::ALL {
            assert_eq!(m.as_str().parse::<Method>().unwrap(), m);
            if let Some(u) = m.used() {
                assert_eq!(u.requested(), m);
                assert_eq!(u.as_str().parse::<MethodUsed>().unwrap(), u);
            }
        }
        for name in Method::NAMES {
            assert!(name.parse::<Method>().is_ok(), "{name}");
        }
        assert!("auto".parse::<MethodUsed>().is_err());
        assert!("magic".parse::<Method>().is_err());
    }

    #[cfg(feature = "serde")]
    #[test]
    fn serialized_words_are_the_command_line_words() {
        let mut checked = 0;
        for &m in Method::ALL {
            if let Some(u) = m.used() {
                assert_eq!(serde_json::to_string(&u).unwrap(), format!("\"{}\"", u.as_str()));
                checked += 1;
            }
        }
        assert_eq!(checked, Method::ALL.len() - 1);
    }
}
