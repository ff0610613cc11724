//! The quick hash maps used for ids, unit spellings and the keys of long YAML mappings: the
//! standard maps with `foldhash`'s fast hasher in its fixed-seed form. The checker hashes every
//! id of a design a few times and looks up the unit of every quantity; a design file is the
//! user's own, so resistance to crafted collisions is not needed, and a fixed seed keeps every
//! run alike.

use std::collections::{HashMap, HashSet};

/// A hash map for short text keys (ids, unit spellings).
pub(crate) type FastMap<K, V> = HashMap<K, V, foldhash::fast::FixedState>;

/// The set of [`FastMap`].
pub(crate) type FastSet<K> = HashSet<K, foldhash::fast::FixedState>;
