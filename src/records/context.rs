//! [`ContextStats`]: what the store keeps about one context, summed from
//! its children (the record every other one builds on).

use serde::{Deserialize, Serialize};

/// Statistics of one context h over its children h·w.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ContextStats {
    /// C(h): sum of the children's raw counts.
    pub count_sum: u64,
    /// T(h): number of children.
    pub types: u64,
    /// A(h): sum of the children's left-type counts.
    pub left_type_sum: u64,
    /// N1(h): children with left-type count 1.
    pub n1: u64,
    /// N2(h): children with left-type count 2.
    pub n2: u64,
    /// N3+(h): children with left-type count 3 or more.
    pub n3plus: u64,
}

impl ContextStats {
    /// Adds one child with raw count `c` and left-type count `a`.
    #[inline]
    pub fn add_child(&mut self, c: u64, a: u64) {
        self.count_sum += c;
        self.types += 1;
        self.left_type_sum += a;
        match a {
            0 => {}
            1 => self.n1 += 1,
            2 => self.n2 += 1,
            _ => self.n3plus += 1,
        }
    }

    /// Adds another partial statistic.
    pub fn merge(&mut self, o: &ContextStats) {
        self.count_sum += o.count_sum;
        self.types += o.types;
        self.left_type_sum += o.left_type_sum;
        self.n1 += o.n1;
        self.n2 += o.n2;
        self.n3plus += o.n3plus;
    }
}
