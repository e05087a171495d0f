//! A NOR flash in RAM for host tests and the desktop tool, strict about NOR rules and able to
//! lose power after any byte.
//!
//! Rules it enforces (as a real NOR part does, or a careless driver would silently break):
//!
//! - reads inside the capacity, at offsets and lengths that are multiples of `READ`;
//! - writes at offsets and lengths that are multiples of `WRITE`, inside the capacity;
//! - erases over whole `ERASE`-sized pages; erased bytes read `0xFF`;
//! - programming only clears bits (1 → 0); a write that would set a bit is refused whole
//!   ([`RamFlashError::BitSet`]) and changes nothing;
//! - with `strict_once`, a word may be programmed once between erases even if the new value
//!   only clears bits ([`RamFlashError::Rewrite`]).
//!
//! Power cut: [`RamFlash::cut_after`] gives a budget of *events*: every byte programmed is one
//! event, every page erase is one event. The operation that exhausts the budget is applied up
//! to that point (a write keeps its first bytes; an erase leaves the page half erased, the
//! first half `0xFF` and the rest as it was, a model of an interrupted erase) and returns
//! [`RamFlashError::PowerCut`]; every later operation fails the same way until
//! [`RamFlash::power_on`].

use embedded_storage::nor_flash::{
    ErrorType, MultiwriteNorFlash, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
};

/// What the fake flash refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum RamFlashError {
    /// Offset or length not a multiple of the read/write/erase size.
    NotAligned,
    /// Outside the capacity.
    OutOfBounds,
    /// The write would turn a 0 bit into 1 at this offset.
    BitSet {
        /// Byte offset.
        offset: u32,
    },
    /// The word at this offset was already programmed since its erase (`strict_once`).
    Rewrite {
        /// Byte offset.
        offset: u32,
    },
    /// Power is off.
    PowerCut,
}

impl core::fmt::Display for RamFlashError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            Self::NotAligned => write!(f, "flash access not aligned"),
            Self::OutOfBounds => write!(f, "flash access out of bounds"),
            Self::BitSet { offset } => write!(f, "flash offset = {offset}: write sets a 0 bit"),
            Self::Rewrite { offset } => write!(f, "flash offset = {offset}: word written twice"),
            Self::PowerCut => write!(f, "flash power cut"),
        }
    }
}

impl core::error::Error for RamFlashError {}

impl NorFlashError for RamFlashError {
    fn kind(&self) -> NorFlashErrorKind {
        match self {
            Self::NotAligned => NorFlashErrorKind::NotAligned,
            Self::OutOfBounds => NorFlashErrorKind::OutOfBounds,
            _ => NorFlashErrorKind::Other,
        }
    }
}

/// `SIZE` bytes of NOR flash in RAM with `READ`/`WRITE`/`ERASE` granularity.
pub struct RamFlash<const SIZE: usize, const READ: usize, const WRITE: usize, const ERASE: usize> {
    mem: [u8; SIZE],
    written: [bool; SIZE],
    strict_once: bool,
    budget: Option<usize>,
    off: bool,
    events: usize,
}

impl<const SIZE: usize, const READ: usize, const WRITE: usize, const ERASE: usize>
    RamFlash<SIZE, READ, WRITE, ERASE>
{
    /// Fully erased flash. `strict_once`: refuse a second program of any byte between erases.
    pub fn new(strict_once: bool) -> Self {
        Self {
            mem: [0xFF; SIZE],
            written: [false; SIZE],
            strict_once,
            budget: None,
            off: false,
            events: 0,
        }
    }

    /// The raw contents (a flash dump).
    pub fn image(&self) -> &[u8; SIZE] {
        &self.mem
    }

    /// Lose power after `events` more events (bytes programmed or pages erased).
    pub fn cut_after(&mut self, events: usize) {
        self.budget = Some(events);
    }

    /// Power back on: operations work again and no cut is pending.
    pub fn power_on(&mut self) {
        self.off = false;
        self.budget = None;
    }

    /// Whether power has been cut.
    pub fn is_off(&self) -> bool {
        self.off
    }

    /// Events (bytes programmed plus pages erased) since creation.
    pub fn events(&self) -> usize {
        self.events
    }

    /// Take one event from the budget; false if power goes (or is) off.
    fn spend(&mut self) -> bool {
        if self.off {
            return false;
        }
        match self.budget {
            Some(0) => {
                self.off = true;
                false
            }
            Some(n) => {
                self.budget = Some(n.saturating_sub(1));
                self.events = self.events.saturating_add(1);
                true
            }
            None => {
                self.events = self.events.saturating_add(1);
                true
            }
        }
    }

    fn range(
        offset: u32,
        len: usize,
        align: usize,
    ) -> Result<core::ops::Range<usize>, RamFlashError> {
        let start = usize::try_from(offset).map_err(|_| RamFlashError::OutOfBounds)?;
        if align == 0 || !start.is_multiple_of(align) || !len.is_multiple_of(align) {
            return Err(RamFlashError::NotAligned);
        }
        let end = start.checked_add(len).ok_or(RamFlashError::OutOfBounds)?;
        if end > SIZE {
            return Err(RamFlashError::OutOfBounds);
        }
        Ok(start..end)
    }
}

impl<const SIZE: usize, const READ: usize, const WRITE: usize, const ERASE: usize> ErrorType
    for RamFlash<SIZE, READ, WRITE, ERASE>
{
    type Error = RamFlashError;
}

impl<const SIZE: usize, const READ: usize, const WRITE: usize, const ERASE: usize> ReadNorFlash
    for RamFlash<SIZE, READ, WRITE, ERASE>
{
    const READ_SIZE: usize = READ;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        if self.off {
            return Err(RamFlashError::PowerCut);
        }
        let r = Self::range(offset, bytes.len(), READ)?;
        bytes.copy_from_slice(self.mem.get(r).ok_or(RamFlashError::OutOfBounds)?);
        Ok(())
    }

    fn capacity(&self) -> usize {
        SIZE
    }
}

impl<const SIZE: usize, const READ: usize, const WRITE: usize, const ERASE: usize> NorFlash
    for RamFlash<SIZE, READ, WRITE, ERASE>
{
    const WRITE_SIZE: usize = WRITE;
    const ERASE_SIZE: usize = ERASE;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
        if self.off {
            return Err(RamFlashError::PowerCut);
        }
        let len = to.checked_sub(from).ok_or(RamFlashError::OutOfBounds)?;
        let r = Self::range(
            from,
            usize::try_from(len).map_err(|_| RamFlashError::OutOfBounds)?,
            ERASE,
        )?;
        let mut page = r.start;
        while page < r.end {
            let end = page.saturating_add(ERASE);
            if !self.spend() {
                let half = page.saturating_add(ERASE / 2);
                self.mem
                    .get_mut(page..half)
                    .into_iter()
                    .flatten()
                    .for_each(|b| *b = 0xFF);
                return Err(RamFlashError::PowerCut);
            }
            self.mem
                .get_mut(page..end)
                .into_iter()
                .flatten()
                .for_each(|b| *b = 0xFF);
            self.written
                .get_mut(page..end)
                .into_iter()
                .flatten()
                .for_each(|w| *w = false);
            page = end;
        }
        Ok(())
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        if self.off {
            return Err(RamFlashError::PowerCut);
        }
        let r = Self::range(offset, bytes.len(), WRITE)?;
        let old = self.mem.get(r.clone()).ok_or(RamFlashError::OutOfBounds)?;
        let was = self
            .written
            .get(r.clone())
            .ok_or(RamFlashError::OutOfBounds)?;
        for (i, ((&o, &n), &w)) in old.iter().zip(bytes).zip(was).enumerate() {
            let at = u32::try_from(r.start.saturating_add(i)).unwrap_or(u32::MAX);
            if n & !o != 0 {
                return Err(RamFlashError::BitSet { offset: at });
            }
            if self.strict_once && w {
                return Err(RamFlashError::Rewrite { offset: at });
            }
        }
        for (i, &n) in bytes.iter().enumerate() {
            if !self.spend() {
                return Err(RamFlashError::PowerCut);
            }
            let at = r.start.saturating_add(i);
            if let (Some(m), Some(w)) = (self.mem.get_mut(at), self.written.get_mut(at)) {
                *m &= n;
                *w = true;
            }
        }
        Ok(())
    }
}

/// Programming only clears bits, which this fake checks, so rewriting a word is allowed
/// (unless `strict_once`).
impl<const SIZE: usize, const READ: usize, const WRITE: usize, const ERASE: usize>
    MultiwriteNorFlash for RamFlash<SIZE, READ, WRITE, ERASE>
{
}

#[cfg(test)]
mod tests {
    use super::*;

    type F = RamFlash<64, 1, 4, 16>;

    #[test]
    fn alignment_and_bounds_are_checked() {
        let mut f = F::new(false);
        assert_eq!(f.write(2, &[0; 4]), Err(RamFlashError::NotAligned));
        assert_eq!(f.write(0, &[0; 3]), Err(RamFlashError::NotAligned));
        assert_eq!(f.write(64, &[0; 4]), Err(RamFlashError::OutOfBounds));
        assert_eq!(f.erase(0, 8), Err(RamFlashError::NotAligned));
        assert_eq!(f.erase(8, 0), Err(RamFlashError::OutOfBounds));
        let mut b = [0u8; 2];
        assert_eq!(f.read(63, &mut b), Err(RamFlashError::OutOfBounds));
    }

    /// NOR programming clears bits only; setting one needs an erase.
    #[test]
    fn bits_only_go_from_one_to_zero() {
        let mut f = F::new(false);
        f.write(4, &[0xF0, 0xFF, 0x0F, 0x00]).unwrap();
        f.write(4, &[0xF0, 0x7F, 0x0F, 0x00]).unwrap(); // clears one more bit: fine
        assert_eq!(
            f.write(4, &[0xF1, 0x7F, 0x0F, 0x00]),
            Err(RamFlashError::BitSet { offset: 4 })
        );
        assert_eq!(&f.image()[4..8], &[0xF0, 0x7F, 0x0F, 0x00]);
        f.erase(0, 16).unwrap();
        assert!(f.image()[..16].iter().all(|&b| b == 0xFF));
        let mut s = F::new(true);
        s.write(0, &[0xFE; 4]).unwrap();
        assert_eq!(
            s.write(0, &[0xFC; 4]),
            Err(RamFlashError::Rewrite { offset: 0 })
        );
    }

    /// A cut after 2 events keeps the first 2 bytes of a 4-byte write; power stays off.
    #[test]
    fn power_cut_mid_write_and_mid_erase() {
        let mut f = F::new(false);
        f.cut_after(2);
        assert_eq!(
            f.write(0, &[0x11, 0x22, 0x33, 0x44]),
            Err(RamFlashError::PowerCut)
        );
        assert_eq!(&f.image()[..4], &[0x11, 0x22, 0xFF, 0xFF]);
        let mut b = [0u8; 1];
        assert_eq!(f.read(0, &mut b), Err(RamFlashError::PowerCut));
        f.power_on();
        f.write(16, &[0; 16]).unwrap();
        f.cut_after(0);
        assert_eq!(f.erase(16, 32), Err(RamFlashError::PowerCut));
        assert!(f.image()[16..24].iter().all(|&b| b == 0xFF));
        assert!(f.image()[24..32].iter().all(|&b| b == 0x00));
        assert_eq!(f.events(), 2 + 16);
    }
}
