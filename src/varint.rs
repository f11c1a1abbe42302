//! LEB128 varints, the integer encoding of run files and store values.

/// Appends `v` as a LEB128 varint.
#[inline]
pub fn put(out: &mut Vec<u8>, mut v: u64) {
    while v >= 0x80 {
        out.push((v as u8) | 0x80);
        v >>= 7;
    }
    out.push(v as u8);
}

/// Reads a LEB128 varint from the front of `b`, advancing it; `None` if
/// `b` ends first or the varint is longer than ten bytes.
#[inline]
pub fn get(b: &mut &[u8]) -> Option<u64> {
    let mut v = 0u64;
    for (i, &byte) in b.iter().enumerate().take(10) {
        v |= ((byte & 0x7f) as u64) << (7 * i);
        if byte < 0x80 {
            *b = &b[i + 1..];
            return Some(v);
        }
    }
    None
}

#[cfg(test)]
mod tests {
    #[test]
    fn round_trip() {
        for v in [0, 1, 127, 128, 300, u32::MAX as u64, u64::MAX] {
            let mut b = Vec::new();
            super::put(&mut b, v);
            let mut s = &b[..];
            assert_eq!(super::get(&mut s), Some(v));
            assert!(s.is_empty());
        }
        assert_eq!(super::get(&mut &[0x80u8][..]), None);
    }
}
