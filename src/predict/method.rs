//! Which estimator: the [`Method`] names and their command-line spelling.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// The estimators quern computes.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Method {
    /// Interpolated modified Kneser-Ney (Chen & Goodman 1998): three
    /// discounts per order over left-type counts.
    Mkn,
    /// Interpolated Kneser-Ney with one discount per order (Ney, Essen &
    /// Kneser 1994) over left-type counts.
    Kn,
    /// Interpolated absolute discounting (Ney, Essen & Kneser 1994) over raw
    /// counts.
    Absolute,
    /// Interpolated Witten-Bell (Witten & Bell 1991).
    WittenBell,
    /// Katz back-off with Good-Turing discounts (Katz 1987).
    Katz,
    /// Linear interpolation of maximum-likelihood estimates (Jelinek &
    /// Mercer 1980), one weight per order or per order and count bucket.
    Interp,
    /// Additive smoothing (Lidstone); k = 1 is Laplace.
    AddK,
    /// Maximum likelihood at the longest seen context; unsmoothed.
    Mle,
    /// Stupid back-off (Brants et al. 2007): scores, not probabilities.
    Stupid,
    /// A back-off model read from ARPA text (`quern freeze --from-arpa`):
    /// whatever method made it elsewhere, it exists only as a frozen
    /// model, never over a store.
    Arpa,
    /// A linear mixture of several stores and models (`quern blend`):
    /// it exists only as a blend file or a model frozen from one, never
    /// over a store.
    Blend,
}

impl Method {
    /// Every method, in the order of the documentation.
    pub const ALL: [Method; 9] = [
        Method::Mkn,
        Method::Kn,
        Method::Absolute,
        Method::WittenBell,
        Method::Katz,
        Method::Interp,
        Method::AddK,
        Method::Mle,
        Method::Stupid,
    ];

    /// The name used on the command line and in files.
    pub fn name(self) -> &'static str {
        match self {
            Method::Mkn => "mkn",
            Method::Kn => "kn",
            Method::Absolute => "absolute",
            Method::WittenBell => "witten-bell",
            Method::Katz => "katz",
            Method::Interp => "interp",
            Method::AddK => "add-k",
            Method::Mle => "mle",
            Method::Stupid => "stupid",
            Method::Arpa => "arpa",
            Method::Blend => "blend",
        }
    }

    /// False for `stupid`, whose scores do not sum to 1 and have no
    /// perplexity. (`mle` is a distribution, but one that gives 0 to every
    /// word unseen after the longest seen context.)
    pub fn is_probability(self) -> bool {
        self != Method::Stupid
    }
}

impl fmt::Display for Method {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Method {
    type Err = Error;
    fn from_str(s: &str) -> Result<Method> {
        Method::ALL
            .into_iter()
            .find(|m| m.name() == s)
            .ok_or_else(|| {
                Error::Config(format!(
                    "unknown method {s:?}; the methods are {}",
                    Method::ALL.map(|m| m.name()).join(", ")
                ))
            })
    }
}
