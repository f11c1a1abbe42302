//! The free parameters of the methods, the discount policy of the
//! Kneser-Ney family, and the parameters file that `quern tune` writes and
//! `--tuned FILE` reads back.

use std::fmt;
use std::path::Path;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

use super::Method;

/// Where the discounts of `mkn`, `kn` and `absolute` come from (`--discounts`).
///
/// The discounts are estimated from each order's count-of-counts
/// ([`crate::discount`]); on a small corpus the counts can leave one
/// undefined or out of range, and the policy says what happens then.
#[derive(Clone, Debug, Default, PartialEq)]
pub enum DiscountPolicy {
    /// `estimate`: from the count-of-counts only; a discount they leave
    /// undefined or out of range is an error naming the order.
    Estimate,
    /// `estimate-or-single` (the default): from the count-of-counts; where
    /// they leave a modified discount D1, D2 or D3+ undefined or out of
    /// range, that order's single discount D = n1/(n1 + 2 n2) takes its
    /// place, with a note. (For `kn` and `absolute` the same as `estimate`.)
    #[default]
    EstimateOrSingle,
    /// `estimate-or:D1,D2,D3+`: from the count-of-counts; the given values
    /// take the place of the unusable ones, with a note (`kn` and
    /// `absolute` use the first value).
    EstimateOr(Vec<f64>),
    /// `fixed:D1,D2,D3+`: the given values at every order, the counts
    /// unused (`kn` and `absolute` use the first value).
    Fixed(Vec<f64>),
}

impl DiscountPolicy {
    /// The accepted spellings, for messages.
    pub const SYNTAX: &'static str =
        "estimate, estimate-or-single, estimate-or:D1,D2,D3+ or fixed:D1,D2,D3+";
}

impl fmt::Display for DiscountPolicy {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let list = |v: &[f64]| {
            v.iter()
                .map(|x| x.to_string())
                .collect::<Vec<_>>()
                .join(",")
        };
        match self {
            DiscountPolicy::Estimate => f.write_str("estimate"),
            DiscountPolicy::EstimateOrSingle => f.write_str("estimate-or-single"),
            DiscountPolicy::EstimateOr(v) => write!(f, "estimate-or:{}", list(v)),
            DiscountPolicy::Fixed(v) => write!(f, "fixed:{}", list(v)),
        }
    }
}

impl FromStr for DiscountPolicy {
    type Err = Error;
    fn from_str(s: &str) -> Result<DiscountPolicy> {
        let bad = |why: String| {
            Error::Config(format!(
                "--discounts {s:?}: {why}; the policies are {}",
                DiscountPolicy::SYNTAX
            ))
        };
        let values = |v: &str| -> Result<Vec<f64>> {
            let xs = v
                .split(',')
                .map(|x| x.trim().parse::<f64>())
                .collect::<std::result::Result<Vec<f64>, _>>()
                .map_err(|_| bad(format!("{v:?} is not a list of numbers")))?;
            if xs.len() != 1 && xs.len() != 3 {
                return Err(bad(format!(
                    "{} values given; give D1,D2,D3+ (or one value D for kn and absolute)",
                    xs.len()
                )));
            }
            Ok(xs)
        };
        match s {
            "estimate" => Ok(DiscountPolicy::Estimate),
            "estimate-or-single" => Ok(DiscountPolicy::EstimateOrSingle),
            _ => {
                if let Some(v) = s.strip_prefix("estimate-or:") {
                    Ok(DiscountPolicy::EstimateOr(values(v)?))
                } else if let Some(v) = s.strip_prefix("fixed:") {
                    Ok(DiscountPolicy::Fixed(values(v)?))
                } else {
                    Err(bad("unknown policy".into()))
                }
            }
        }
    }
}

impl Serialize for DiscountPolicy {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}

impl<'de> Deserialize<'de> for DiscountPolicy {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        let s = String::deserialize(d)?;
        s.parse().map_err(serde::de::Error::custom)
    }
}

/// The free parameters of the methods. Each method reads only its own;
/// `Params::default()` gives the documented defaults.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Params {
    /// `add-k`: the added count k (> 0). Default 1 (Laplace).
    pub k: f64,
    /// `stupid`: the back-off factor α. Default 0.4 (Brants et al. 2007).
    pub alpha: f64,
    /// `interp`: the weight λ of orders 1..N, each in [0, 1]. Default 0.5
    /// for every order (the starting point of `tune`).
    pub lambdas: Option<Vec<f64>>,
    /// `interp`, conditional: weights per order (outer, 1..N) and per bucket
    /// of the context's count C(h) (inner): bucket b holds C(h) in
    /// [2^b, 2^(b+1)), the last bucket everything above. Overrides `lambdas`.
    pub bucket_lambdas: Option<Vec<Vec<f64>>>,
    /// `katz`: the largest count that is discounted, K. Default 5; lowered
    /// per order where Good-Turing is undefined or out of range.
    pub katz_k: usize,
    /// `mkn`, `kn`, `absolute`: where the discounts come from. Default
    /// [`DiscountPolicy::EstimateOrSingle`].
    pub discounts: DiscountPolicy,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            k: 1.0,
            alpha: 0.4,
            lambdas: None,
            bucket_lambdas: None,
            katz_k: 5,
            discounts: DiscountPolicy::default(),
        }
    }
}

/// What the parameters file says it is (its `kind` field).
pub const PARAMS_FILE_KIND: &str = "quern tuned parameters";

/// Version of the parameters file. A file of version 1 (no `kind` and
/// `version` fields, written before the discount policies) is refused
/// with the advice to fit the parameters again.
pub const PARAMS_FILE_VERSION: u32 = 2;

/// The parameters file written by `quern tune`: the method they were
/// fitted for and the parameters.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ParamsFile {
    /// [`PARAMS_FILE_KIND`].
    pub kind: String,
    /// [`PARAMS_FILE_VERSION`].
    pub version: u32,
    /// The method the parameters were fitted for.
    pub method: Method,
    /// The parameters.
    pub params: Params,
}

impl ParamsFile {
    /// A file of the current version.
    pub fn new(method: Method, params: Params) -> ParamsFile {
        ParamsFile {
            kind: PARAMS_FILE_KIND.into(),
            version: PARAMS_FILE_VERSION,
            method,
            params,
        }
    }

    /// The file as written: pretty JSON and a newline.
    pub fn to_text(&self) -> String {
        serde_json::to_string_pretty(self).expect("parameters serialize") + "\n"
    }

    /// Parses a file of version 2. `path` only names the file in errors.
    pub fn parse(path: &Path, text: &str) -> Result<ParamsFile> {
        let bad = |why: String| {
            Error::Config(format!(
                "{}: not a parameters file of quern tune: {why}",
                path.display()
            ))
        };
        let v: serde_json::Value = serde_json::from_str(text).map_err(|e| bad(e.to_string()))?;
        let obj = v
            .as_object()
            .ok_or_else(|| bad("not a JSON object".into()))?;
        match obj.get("version").map(|x| x.as_u64()) {
            Some(Some(x)) if x == PARAMS_FILE_VERSION as u64 => {}
            None => {
                return Err(Error::Config(format!(
                    "{}: a parameters file of version 1 (no version field), written before \
                     the discount policies; this quern reads version {PARAMS_FILE_VERSION}: \
                     run `quern tune` again",
                    path.display()
                )))
            }
            Some(x) => {
                return Err(bad(format!(
                    "version {} (this quern reads version {PARAMS_FILE_VERSION})",
                    x.map_or("?".into(), |x| x.to_string())
                )))
            }
        }
        let f: ParamsFile = serde_json::from_value(v).map_err(|e| bad(e.to_string()))?;
        if f.kind != PARAMS_FILE_KIND {
            return Err(bad(format!("its kind is {:?}", f.kind)));
        }
        Ok(f)
    }

    /// Reads and parses a file.
    pub fn load(path: &Path) -> Result<ParamsFile> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, "read", e))?;
        ParamsFile::parse(path, &text)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn policy_spellings_round_trip() {
        for s in [
            "estimate",
            "estimate-or-single",
            "estimate-or:0.8,1.1,1.4",
            "fixed:0.5",
        ] {
            let p: DiscountPolicy = s.parse().unwrap();
            assert_eq!(p.to_string(), s);
        }
        assert_eq!(
            "fixed:0.7,1,1.5".parse::<DiscountPolicy>().unwrap(),
            DiscountPolicy::Fixed(vec![0.7, 1.0, 1.5])
        );
        for bad in ["", "data", "fixed:", "fixed:1,2", "estimate-or:a,b,c"] {
            let e = bad.parse::<DiscountPolicy>().unwrap_err().to_string();
            assert!(e.contains("--discounts"), "{e}");
        }
    }

    /// A file of the current version reads back as written; a file of
    /// version 1 (no version field) and one of an unknown version are
    /// refused, naming the file and the version.
    #[test]
    fn version_2_is_read_and_others_refused() {
        let p = Path::new("t.json");
        let v2 = ParamsFile::new(
            Method::AddK,
            Params {
                k: 0.01,
                ..Params::default()
            },
        );
        assert_eq!(ParamsFile::parse(p, &v2.to_text()).unwrap(), v2);
        let v1 = r#"{"method": "interp", "params": {"k": 1.0, "alpha": 0.4,
            "lambdas": [0.3, 0.8], "bucket_lambdas": null, "katz_k": 5}}"#;
        let e = ParamsFile::parse(p, v1).unwrap_err().to_string();
        assert!(
            e.contains("t.json") && e.contains("version 1") && e.contains("quern tune"),
            "{e}"
        );
        let v9 =
            r#"{"kind": "quern tuned parameters", "version": 9, "method": "mkn", "params": {}}"#;
        let e = ParamsFile::parse(p, v9).unwrap_err().to_string();
        assert!(e.contains("t.json") && e.contains("version 9"), "{e}");
    }
}
