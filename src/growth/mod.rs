//! Vocabulary growth: how many distinct types were seen after reading t
//! tokens, in corpus order (inputs in sorted order, then byte order), at
//! roughly logarithmic sample points, exactly and whatever the threads,
//! memory budget, spills or resumes of the ingest.
//!
//! # Design
//!
//! A count worker reads its spans of the input in corpus order (the span
//! queue is in corpus order and each worker takes spans from its front), and
//! cuts them into *covers*, the input ranges a spill records. Beside its
//! dictionary, the worker keeps a [`FirstSeen`] map from each word it has
//! seen since its last spill to the cover it was first seen in and its
//! token position there. Because the worker's covers are in corpus order,
//! that first sighting is the word's earliest in the spill. At every spill
//! the map is written, sorted by word id, as a side file ([`file`]) next to
//! the dictionary, with the number of tokens of each cover, and recorded
//! with the spill in the manifest.
//!
//! After counting, every cover of every spill is put in corpus order and
//! given its global token offset; a k-way merge of the side files by word id
//! ([`curve::growth_curve`], in rounds of at most the merge fan-in, so the
//! open files and the memory are bounded) finds each word's global first
//! position p, and a histogram over the sample points gives
//! types(t) = #{w : p(w) < t}. Only what the counting contract calls tokens
//! are positions: every word and one `</s>` per sentence, never `<s>`; so the
//! last point is (T, types) of the store's totals.
//!
//! # Sample points
//!
//! t = ⌈10^d · m / 100⌉ for d = 0, 1, 2, … and m in the R20 series of
//! preferred numbers (ISO 3: 1.00, 1.12, 1.25, …, 9.00), so 20 points per
//! decade, computed in integers; the curve holds every sample point below T,
//! and (T, types) as its last point.
//!
//! # Append
//!
//! `--append` reads the new inputs after the store's own corpus: the store's
//! words are a first cover of T₀ tokens (its vocabulary, all at position 0),
//! the curve keeps the store's sample points up to T₀ and continues above
//! it. The result is the curve of one ingest of the old corpus followed by
//! the new inputs. A store without a curve (built before curves existed)
//! gives a store without a curve after an append.

pub mod curve;
pub mod file;
mod track;

pub use curve::growth_curve;
pub use track::FirstSeen;

/// The R20 series of preferred numbers (ISO 3), times 100.
const R20: [u64; 20] = [
    100, 112, 125, 140, 160, 180, 200, 224, 250, 280, 315, 355, 400, 450, 500, 560, 630, 710, 800,
    900,
];

/// The sample points below `limit`, ascending, without repeats.
pub fn sample_points(limit: u64) -> Vec<u64> {
    let mut out: Vec<u64> = Vec::new();
    let mut scale: u64 = 1;
    'outer: loop {
        for m in R20 {
            let t = match scale.checked_mul(m) {
                Some(x) => x.div_ceil(100),
                None => break 'outer,
            };
            if t >= limit {
                break 'outer;
            }
            if out.last() != Some(&t) {
                out.push(t);
            }
        }
        scale = match scale.checked_mul(10) {
            Some(s) => s,
            None => break,
        };
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sample_points_are_r20_per_decade() {
        let p = sample_points(1000);
        assert_eq!(&p[..9], &[1, 2, 3, 4, 5, 6, 7, 8, 9]);
        // 100..1000: exactly the R20 values (ISO 3) times 100.
        let hundreds: Vec<u64> = p.iter().copied().filter(|&t| t >= 100).collect();
        assert_eq!(hundreds, R20.to_vec());
        assert!(p.windows(2).all(|w| w[0] < w[1]));
        assert!(sample_points(1).is_empty());
        assert_eq!(sample_points(2), vec![1]);
    }
}
