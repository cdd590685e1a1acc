//! Spatial autocorrelation statistics.
//!
//! * [`moments`]: the weight sums S0, S1, S2 of Cliff and Ord (1981) and the
//!   symmetrized quadratic form used by every statistic.
//! * [`permutation`]: reproducible random permutations, one seeded stream
//!   per draw, so results never depend on the number of threads.
//! * [`global`]: global Moran's I with inference under normality,
//!   randomization and permutation.
//! * [`geary`], [`getis`], [`joins`]: global Geary's C, Getis-Ord G and
//!   join counts, with the same inference.

pub mod geary;
pub mod getis;
pub mod global;
pub mod joins;
pub mod local;
pub mod moments;
pub mod permutation;

use crate::error::{Error, Result};

/// Direction of the alternative hypothesis, as in scipy.stats.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Alternative {
    TwoSided,
    Greater,
    Less,
}

impl Alternative {
    /// Parse the public name.
    pub fn parse(name: &str) -> Result<Self> {
        match name {
            "two-sided" => Ok(Self::TwoSided),
            "greater" => Ok(Self::Greater),
            "less" => Ok(Self::Less),
            _ => Err(Error::UnknownAlternative { name: name.to_string() }),
        }
    }
}
