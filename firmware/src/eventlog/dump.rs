//! Reader for a raw image of the event-log flash range (a dump pulled off the device), for
//! the desktop tool. No flash access, no allocation: an iterator over `&[u8]`.
//!
//! The image holds a `sequential-storage` 8.x queue. This module reads that on-flash layout
//! directly (the crate's reader needs a writable flash and stops at corruption); the layout
//! is the crate's documented one, pinned by its major version, and the tests check this
//! reader against images the crate itself wrote, including ones cut off mid-write:
//!
//! - the range is split into pages of `erase_size`; a page's first and last flash word are
//!   its state markers (a marker counts as written when at least 4 bits of its first
//!   `read_size` bytes are 0): neither = open, first only = partly written, both = closed,
//!   last only = an interrupted erase;
//! - between the markers, items follow each other: an 8-byte header padded to the flash
//!   word (`[data crc u32][length u16][crc16 of length u16]`, little-endian), then the data
//!   padded to the word; an all-`0xFF` header ends the page; a data crc of 0 marks an item
//!   popped from the queue;
//! - the oldest page is the first closed page after the youngest (the first partly written
//!   page, else the first open page after a closed one), and pages are read oldest first.
//!
//! Each item's data is one event frame ([`holdback_core::event`]). The reader yields every
//! record it can and a [`DumpEntry::Corrupt`] with the byte offset and length of every region
//! it cannot, then goes on. Offsets are from the start of the image.

use core::fmt;

use holdback_core::event::{self, DecodeError, EventRecord};

const HEADER_LEN: usize = 8;

/// Flash geometry of the dumped range, checked.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Geometry {
    erase_size: usize,
    read_size: usize,
    word: usize,
}

/// A rejected geometry or image.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum GeometryError {
    /// Read and write sizes must be ≥ 1, ≤ 32 and multiples of one another.
    WordSize,
    /// The page must be a multiple of the word and hold the two markers and a header.
    PageSize,
    /// The image length must be a non-zero multiple of the page size.
    ImageLength(usize),
}

impl fmt::Display for GeometryError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::WordSize => write!(f, "read/write size: must be 1..=32 and divide each other"),
            Self::PageSize => write!(
                f,
                "erase size: must be a multiple of the word, >= 3 words + header"
            ),
            Self::ImageLength(n) => write!(
                f,
                "image length = {n}: must be a non-zero multiple of the erase size"
            ),
        }
    }
}

impl core::error::Error for GeometryError {}

impl Geometry {
    /// Geometry from the flash's `READ_SIZE`, `WRITE_SIZE` and `ERASE_SIZE`.
    pub fn new(
        read_size: usize,
        write_size: usize,
        erase_size: usize,
    ) -> Result<Self, GeometryError> {
        let ok_word = (1..=32).contains(&read_size)
            && (1..=32).contains(&write_size)
            && (read_size.is_multiple_of(write_size) || write_size.is_multiple_of(read_size));
        if !ok_word {
            return Err(GeometryError::WordSize);
        }
        let word = read_size.max(write_size);
        let header = HEADER_LEN.next_multiple_of(word);
        let min = word.saturating_mul(3).saturating_add(header);
        if !erase_size.is_multiple_of(word) || erase_size < min {
            return Err(GeometryError::PageSize);
        }
        Ok(Self {
            erase_size,
            read_size,
            word,
        })
    }
}

/// Why a region was not read as records.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Corruption {
    /// Page end marker set without its start marker (interrupted erase): the page is skipped.
    PageState,
    /// Item header failed its length check: the rest of the page is skipped.
    ItemHeader,
    /// Item header claims more data than the page holds: the rest of the page is skipped.
    ItemLength,
    /// Item data failed its crc (for example a write cut off by power loss).
    ItemData,
    /// Item data intact but not an event frame.
    Frame(DecodeError),
}

/// One thing found in the image.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DumpEntry {
    /// A valid record whose item starts at `offset`.
    Record {
        /// Byte offset of the item header in the image.
        offset: usize,
        /// The record.
        record: EventRecord,
    },
    /// `len` bytes from `offset` that could not be read.
    Corrupt {
        /// Byte offset in the image.
        offset: usize,
        /// Length of the region, bytes.
        len: usize,
        /// Why.
        why: Corruption,
    },
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum PageState {
    Open,
    Partial,
    Closed,
    Broken,
}

/// Iterator over the entries of a dumped image, oldest page first.
pub struct DumpReader<'a> {
    image: &'a [u8],
    g: Geometry,
    pages: usize,
    oldest: usize,
    /// Pages started so far (0..=pages).
    visited: usize,
    /// Next item address in the current page, if one is being walked.
    cursor: Option<(usize, usize)>,
}

impl<'a> DumpReader<'a> {
    /// Read `image`, a dump of the whole queue range, with the flash's geometry.
    pub fn new(image: &'a [u8], g: Geometry) -> Result<Self, GeometryError> {
        if image.is_empty() || !image.len().is_multiple_of(g.erase_size) {
            return Err(GeometryError::ImageLength(image.len()));
        }
        let pages = image.len().checked_div(g.erase_size).unwrap_or(0);
        let mut r = Self {
            image,
            g,
            pages,
            oldest: 0,
            visited: 0,
            cursor: None,
        };
        r.oldest = r.find_oldest();
        Ok(r)
    }

    fn page_state(&self, page: usize) -> PageState {
        let start = page.saturating_mul(self.g.erase_size);
        let end = start.saturating_add(self.g.erase_size);
        let marked = |from: usize| {
            self.image
                .get(from..from.saturating_add(self.g.read_size))
                .map_or(0, |b| b.iter().map(|x| x.count_zeros()).sum::<u32>())
                >= 4
        };
        match (marked(start), marked(end.saturating_sub(self.g.read_size))) {
            (true, true) => PageState::Closed,
            (true, false) => PageState::Partial,
            (false, true) => PageState::Broken,
            (false, false) => PageState::Open,
        }
    }

    fn first_from(&self, from: usize, state: PageState) -> Option<usize> {
        (0..self.pages)
            .map(|k| from.saturating_add(k).checked_rem(self.pages).unwrap_or(0))
            .find(|&p| self.page_state(p) == state)
    }

    fn find_oldest(&self) -> usize {
        let youngest = self.first_from(0, PageState::Partial).or_else(|| {
            match self.first_from(0, PageState::Closed) {
                Some(anchor) => self.first_from(anchor, PageState::Open),
                None => Some(0),
            }
        });
        let youngest = youngest.unwrap_or(0);
        self.first_from(youngest, PageState::Closed)
            .unwrap_or(youngest)
    }

    /// Walk one item at `addr` in a page whose data ends at `end`. Returns the entry (if any)
    /// and where to go next (`None`: page done).
    fn item(&self, addr: usize, end: usize) -> (Option<DumpEntry>, Option<usize>) {
        let w = self.g.word;
        let header_len = HEADER_LEN.next_multiple_of(w);
        let rest = DumpEntry::Corrupt {
            offset: addr,
            len: end.saturating_sub(addr),
            why: Corruption::ItemHeader,
        };
        let Some(header) = self
            .image
            .get(addr..addr.saturating_add(header_len))
            .filter(|_| addr.saturating_add(header_len) <= end)
        else {
            return (None, None);
        };
        if header.iter().all(|&b| b == 0xFF) {
            return (None, None);
        }
        let (crc, len, len_crc) = match header {
            [c0, c1, c2, c3, l0, l1, k0, k1, ..] => (
                u32::from_le_bytes([*c0, *c1, *c2, *c3]),
                [*l0, *l1],
                u16::from_le_bytes([*k0, *k1]),
            ),
            _ => return (Some(rest), None),
        };
        if crc16(&len) != len_crc {
            return (Some(rest), None);
        }
        let data_len = usize::from(u16::from_le_bytes(len));
        let data_at = addr.saturating_add(header_len);
        let next = data_at.saturating_add(data_len.next_multiple_of(w));
        if next > end {
            let e = DumpEntry::Corrupt {
                offset: addr,
                len: end.saturating_sub(addr),
                why: Corruption::ItemLength,
            };
            return (Some(e), None);
        }
        if crc == 0 {
            return (None, Some(next)); // popped
        }
        let Some(data) = self.image.get(data_at..data_at.saturating_add(data_len)) else {
            return (Some(rest), None);
        };
        let region = next.saturating_sub(addr);
        if adapted_crc32(data) != crc {
            let e = DumpEntry::Corrupt {
                offset: addr,
                len: region,
                why: Corruption::ItemData,
            };
            return (Some(e), Some(next));
        }
        let e = match event::decode_exact(data) {
            Ok(record) => DumpEntry::Record {
                offset: addr,
                record,
            },
            Err(d) => DumpEntry::Corrupt {
                offset: addr,
                len: region,
                why: Corruption::Frame(d),
            },
        };
        (Some(e), Some(next))
    }
}

impl Iterator for DumpReader<'_> {
    type Item = DumpEntry;

    fn next(&mut self) -> Option<DumpEntry> {
        loop {
            if let Some((addr, end)) = self.cursor {
                let (entry, next) = self.item(addr, end);
                self.cursor = next.map(|n| (n, end));
                if entry.is_some() {
                    return entry;
                }
                continue;
            }
            if self.visited >= self.pages {
                return None;
            }
            let page = self
                .oldest
                .saturating_add(self.visited)
                .checked_rem(self.pages)
                .unwrap_or(0);
            self.visited = self.visited.saturating_add(1);
            let start = page.saturating_mul(self.g.erase_size);
            match self.page_state(page) {
                PageState::Open => {}
                PageState::Broken => {
                    return Some(DumpEntry::Corrupt {
                        offset: start,
                        len: self.g.erase_size,
                        why: Corruption::PageState,
                    });
                }
                PageState::Partial | PageState::Closed => {
                    let end = start
                        .saturating_add(self.g.erase_size)
                        .saturating_sub(self.g.word);
                    self.cursor = Some((start.saturating_add(self.g.word), end));
                }
            }
        }
    }
}

/// The length check of an item header: CRC-16 with reflected polynomial 0x1A2E (Koopman's
/// CRC-16F/4.2), init and xor-out 0xFFFF, 0xFFFF mapped to 0xFFFE, as sequential-storage 8.
fn crc16(data: &[u8]) -> u16 {
    let mut crc: u16 = 0xFFFF;
    for &b in data {
        crc ^= u16::from(b);
        for _ in 0..8 {
            let mask = 0u16.wrapping_sub(crc & 1);
            crc = (crc >> 1) ^ (0x1A2E & mask);
        }
    }
    match !crc {
        0xFFFF => 0xFFFE,
        c => c,
    }
}

/// The data check of an item: CRC-32C (reflected Castagnoli 0x82F63B78) with init
/// 0xEEEEEEEE and final inversion; 0 becomes 1 and a value whose low byte is 0x00 or 0xFF has
/// its lowest bit flipped, as sequential-storage 8.
fn adapted_crc32(data: &[u8]) -> u32 {
    let mut crc: u32 = 0xEEEE_EEEE;
    for &b in data {
        crc ^= u32::from(b);
        for _ in 0..8 {
            let mask = 0u32.wrapping_sub(crc & 1);
            crc = (crc >> 1) ^ (0x82F6_3B78 & mask);
        }
    }
    match !crc {
        0 => 1,
        v if v & 0xFF == 0 || v & 0xFF == 0xFF => v ^ 1,
        v => v,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// With the standard init 0xFFFFFFFF, the same loop is CRC-32C, whose catalogue check
    /// value for "123456789" is 0xE3069283 (Greg Cook's CRC catalogue, CRC-32/ISCSI); this
    /// pins the polynomial and reflection the adapted variant builds on.
    #[test]
    fn crc32c_core_matches_catalogue() {
        let mut crc: u32 = 0xFFFF_FFFF;
        for &b in b"123456789" {
            crc ^= u32::from(b);
            for _ in 0..8 {
                let mask = 0u32.wrapping_sub(crc & 1);
                crc = (crc >> 1) ^ (0x82F6_3B78 & mask);
            }
        }
        assert_eq!(!crc, 0xE306_9283);
    }

    #[test]
    fn geometry_and_image_are_checked() {
        assert_eq!(Geometry::new(0, 4, 256), Err(GeometryError::WordSize));
        assert_eq!(Geometry::new(3, 4, 256), Err(GeometryError::WordSize));
        assert_eq!(Geometry::new(1, 4, 16), Err(GeometryError::PageSize));
        let g = Geometry::new(1, 4, 256).unwrap();
        assert!(DumpReader::new(&[0xFF; 100], g).is_err());
        assert!(DumpReader::new(&[], g).is_err());
        assert_eq!(DumpReader::new(&[0xFF; 512], g).unwrap().count(), 0);
    }
}
