//! Problem generators of our own, usable from tests, benches and the command line
//! (`tangency generate FAMILY --size K --out DIR`).
//!
//! | family | [`Family`] | unknowns | what it exercises |
//! |---|---|---|---|
//! | `poisson-control` | [`Family::PoissonControl`] | n = 2k², m = k² (N = 3k²) | PDE constraints, badly scaled blocks, large fill |
//! | `tied-lattice` | [`Family::TiedLattice`] | n = 2(k+1)(k+2), m = 5k + 3 | singular H (floating parts), many tie and multipoint constraints, supports |
//! | `stokes-mac` | [`Family::StokesMac`] | n = 2k(k−1), m = k² − 1 | saddle-point flow constraints (divergence), zero (2,2) block, many delayed pivots |
//! | `heat-cube` | [`Family::HeatCube`] | n = 2k³, m = k³ (N = 3k³) | 3D PDE constraints (7-point stencil), large separators: where nested dissection matters |
//!
//! Both are invented scenarios for testing linear algebra. They are **not** design or
//! analysis tools for real plates, structures or heating systems; defer to local codes
//! and licensed practice for those.

pub mod heat_cube;
pub mod lattice;
pub mod poisson;
pub mod stokes;

use std::path::Path;
use std::str::FromStr;

use crate::error::{Error, Result};
use crate::problem::Problem;

pub use heat_cube::HeatCube;
pub use lattice::TiedLattice;
pub use poisson::PoissonControl;
pub use stokes::StokesMac;

/// A generated problem family.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum Family {
    /// Distributed control of a 2D Poisson equation on a k×k grid ([`PoissonControl`]).
    PoissonControl,
    /// A cross-braced spring lattice in two tied halves with supports and a rigid edge
    /// ([`TiedLattice`]).
    TiedLattice,
    /// Slow flow in a closed box on a staggered grid ([`StokesMac`]).
    StokesMac,
    /// Distributed control of a 3D Poisson equation on a k×k×k grid ([`HeatCube`]).
    HeatCube,
}

impl Family {
    /// Every family name the command line accepts.
    pub const NAMES: &'static [&'static str] = &["poisson-control", "tied-lattice", "stokes-mac", "heat-cube"];

    /// The problem of size parameter `k` with default settings.
    ///
    /// ```
    /// use tangency::generate::Family;
    /// let p = Family::PoissonControl.problem(4)?;
    /// assert_eq!((p.n(), p.m()), (32, 16));
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn problem(self, k: usize) -> Result<Problem> {
        match self {
            Family::PoissonControl => PoissonControl::new(k).build(),
            Family::TiedLattice => TiedLattice::new(k).build(),
            Family::StokesMac => StokesMac::new(k).build(),
            Family::HeatCube => HeatCube::new(k).build(),
        }
    }
}

impl FromStr for Family {
    type Err = Error;
    fn from_str(s: &str) -> Result<Self> {
        match s {
            "poisson-control" => Ok(Family::PoissonControl),
            "tied-lattice" => Ok(Family::TiedLattice),
            "stokes-mac" => Ok(Family::StokesMac),
            "heat-cube" => Ok(Family::HeatCube),
            other => Err(Error::InvalidOption(format!(
                "unknown problem family '{other}'; known families: {}",
                Family::NAMES.join(", ")
            ))),
        }
    }
}

/// Generates the family's problem of size `k` and writes it as a problem directory.
/// Returns the problem.
pub fn write_family(family: Family, k: usize, dir: impl AsRef<Path>) -> Result<Problem> {
    let p = family.problem(k)?;
    crate::io::write_problem_dir(&p, dir)?;
    Ok(p)
}

pub(crate) fn check_size(k: usize, min: usize, max: usize) -> Result<()> {
    if k < min || k > max {
        return Err(Error::InvalidOption(format!(
            "size {k} is outside the supported range {min}..={max}"
        )));
    }
    Ok(())
}
