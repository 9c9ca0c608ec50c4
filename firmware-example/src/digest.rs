//! A digest of chain records that the firmware and the host compute alike.
//!
//! FNV-1a (64-bit) over the postcard encoding of every record, in order (records as a host
//! replay keeps them: `ProbeWindow::without_sums`). postcard writes
//! every field of a record (integers as varints, floats as their IEEE bits, `Option` and
//! `heapless::Vec` with a tag or length), so two sequences of records have the same digest
//! exactly when they are equal field by field (up to the odds of a 64-bit collision); no
//! field list to keep in step with the core. The bytes are hashed as postcard emits them,
//! through a serialisation "flavor", so no buffer is needed.
//!
//! This file is compiled into the firmware and, through `#[path]`, into the capture
//! generator (`capture-gen`), which computes the digest of a host replay.

use postcard::ser_flavors::Flavor;
use serde::Serialize;

const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;
const FNV_PRIME: u64 = 0x0000_0100_0000_01b3;

/// A running digest of records.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Digest {
    hash: u64,
    records: u32,
}

impl Default for Digest {
    fn default() -> Self {
        Self::new()
    }
}

impl Digest {
    /// The digest of no record.
    pub const fn new() -> Self {
        Digest {
            hash: FNV_OFFSET,
            records: 0,
        }
    }

    /// Add one record. Returns false if it could not be encoded (cannot happen for the
    /// core's record types; the digest then differs from any host digest).
    pub fn add<T: Serialize>(&mut self, record: &T) -> bool {
        self.records = self.records.saturating_add(1);
        match postcard::serialize_with_flavor(record, Hasher(self.hash)) {
            Ok(h) => {
                self.hash = h;
                true
            }
            Err(_) => {
                self.hash = !self.hash;
                false
            }
        }
    }

    /// The digest value.
    pub const fn value(&self) -> u64 {
        self.hash
    }

    /// Records added.
    pub const fn records(&self) -> u32 {
        self.records
    }
}

/// A postcard flavor that feeds every byte to FNV-1a instead of storing it.
struct Hasher(u64);

impl Flavor for Hasher {
    type Output = u64;

    fn try_push(&mut self, data: u8) -> postcard::Result<()> {
        self.0 = (self.0 ^ data as u64).wrapping_mul(FNV_PRIME);
        Ok(())
    }

    fn finalize(self) -> postcard::Result<u64> {
        Ok(self.0)
    }
}
