//! The quick hash map used for ids and unit spellings.

use std::collections::{HashMap, HashSet};
use std::hash::{BuildHasherDefault, Hasher};

/// A hash map for short text keys (ids, unit spellings), with a hasher much quicker than the
/// default: the checker hashes every id of a design a few times and looks up the unit of every
/// quantity. A design file is the user's own, so resistance to crafted collisions is not needed.
pub(crate) type FastMap<K, V> = HashMap<K, V, BuildHasherDefault<IdHasher>>;

/// The set of [`FastMap`].
pub(crate) type FastSet<K> = HashSet<K, BuildHasherDefault<IdHasher>>;

/// A multiply-rotate hash taken eight bytes at a time (the scheme of the Rust compiler's own
/// "Fx" hasher): ids such as `load-000123` hash in a few steps.
#[derive(Default)]
pub(crate) struct IdHasher(u64);

impl IdHasher {
    /// Multiplier of the Fx scheme (from memory); any odd constant with well-mixed bits works.
    const K: u64 = 0x517c_c1b7_2722_0a95;

    fn add(&mut self, word: u64) {
        self.0 = (self.0.rotate_left(5) ^ word).wrapping_mul(Self::K);
    }
}

impl Hasher for IdHasher {
    fn finish(&self) -> u64 {
        self.0
    }

    fn write(&mut self, bytes: &[u8]) {
        let mut chunks = bytes.chunks_exact(8);
        for c in &mut chunks {
            let mut w = [0u8; 8];
            w.copy_from_slice(c);
            self.add(u64::from_le_bytes(w));
        }
        let rest = chunks.remainder();
        if !rest.is_empty() {
            let mut w = [0u8; 8];
            w[..rest.len()].copy_from_slice(rest);
            self.add(u64::from_le_bytes(w));
        }
    }
}
