//! Typed flag values, parsed by clap before any command runs: a bad size,
//! method or discount policy is refused with the library's own message
//! (the one the Python module gives too) before anything is opened.

use quern::query::{DiscountPolicy, Method};

/// The syntax of a SIZE, for the help of every flag that takes one.
macro_rules! size_syntax {
    () => {
        "SIZE: bytes, or a number with a unit: KiB, MiB, GiB (powers of 1024: \
         1GiB is 1,073,741,824 bytes) or K, M, G (powers of 1000: 1.5G is \
         1,500,000,000 bytes)."
    };
}
pub(crate) use size_syntax;

/// The methods a query command takes, for its help.
macro_rules! method_list {
    () => {
        "mkn, kn, absolute, witten-bell, katz, interp, add-k, mle or stupid"
    };
}
pub(crate) use method_list;

/// A number of bytes given as a SIZE ([`size_syntax!`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ByteSize(pub u64);

impl ByteSize {
    /// The bytes.
    pub fn bytes(self) -> u64 {
        self.0
    }
}

/// clap's parser of `--unique`.
pub fn unique(s: &str) -> Result<quern::records::Unique, String> {
    serde_json::from_value(serde_json::Value::String(s.to_string()))
        .map_err(|_| format!("{s:?} is not lines or documents"))
}

/// clap's parser of a SIZE.
pub fn byte_size(s: &str) -> Result<ByteSize, quern::Error> {
    quern::memory::parse_size(s).map(ByteSize)
}

/// clap's parser of a method name.
pub fn method(s: &str) -> Result<Method, quern::Error> {
    s.parse()
}

/// clap's parser of how a typed prefix matches (`exact` or `folded`).
pub fn prefix_match(s: &str) -> Result<quern::PrefixMatch, String> {
    s.parse()
}

/// clap's parser of a discount policy.
pub fn discount_policy(s: &str) -> Result<DiscountPolicy, quern::Error> {
    s.parse()
}

/// `json`, `text` or `off`.
pub fn log_format(s: &str) -> Result<quern::serve::LogFormat, String> {
    use quern::serve::LogFormat;
    match s {
        "json" => Ok(LogFormat::Json),
        "text" => Ok(LogFormat::Text),
        "off" => Ok(LogFormat::Off),
        _ => Err(format!("{s:?}: json, text or off")),
    }
}

/// `2.5` → 2.5 seconds (above 0, at most a day).
pub fn seconds(s: &str) -> Result<std::time::Duration, String> {
    s.trim()
        .parse::<f64>()
        .ok()
        .filter(|x| *x > 0.0 && *x <= 86_400.0)
        .map(std::time::Duration::from_secs_f64)
        .ok_or_else(|| format!("{s:?}: seconds above 0 and at most 86400, such as 5 or 0.5"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_methods_and_policies_parse_as_the_library_does() {
        // 1GiB = 2^30 and 1.5G = 1.5e9 bytes (the unit definitions: IEC
        // 80000-13 binary prefixes, SI decimal prefixes).
        assert_eq!(byte_size("1GiB").unwrap().bytes(), 1 << 30);
        assert_eq!(byte_size("1.5G").unwrap().bytes(), 1_500_000_000);
        assert_eq!(
            byte_size("lots").unwrap_err().to_string(),
            quern::memory::parse_size("lots").unwrap_err().to_string()
        );
        for m in Method::ALL {
            assert_eq!(method(m.name()).unwrap(), m);
            assert!(method_list!().contains(m.name()), "{m} is not in the help");
        }
        assert!(method("nope").is_err());
        assert_eq!(
            discount_policy("fixed:0.5,1,1.5").unwrap().to_string(),
            "fixed:0.5,1,1.5"
        );
        assert!(discount_policy("sometimes").is_err());
    }
}
