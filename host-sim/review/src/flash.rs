//! A NOR flash on the heap for the desktop side: the firmware's `RamFlash` keeps its bytes in
//! an array on the stack, which is too small for a device's whole log range. Same rules as a
//! real NOR part: aligned access, erase to `0xFF` by whole pages, programming only clears
//! bits. Used to run the firmware's real `EventLog` on the desktop (demo fleet, checks).

use embedded_storage::nor_flash::{
    ErrorType, MultiwriteNorFlash, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
};

/// What the heap flash refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VecFlashError {
    /// Offset or length not a multiple of the read/write/erase size.
    NotAligned,
    /// Outside the capacity.
    OutOfBounds,
    /// The write would set a bit that is 0 (NOR programs 1 → 0 only).
    BitSet {
        /// Byte offset.
        offset: usize,
    },
}

impl std::fmt::Display for VecFlashError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Self::NotAligned => write!(f, "flash access not aligned"),
            Self::OutOfBounds => write!(f, "flash access out of bounds"),
            Self::BitSet { offset } => write!(f, "flash offset = {offset}: write sets a 0 bit"),
        }
    }
}

impl std::error::Error for VecFlashError {}

impl NorFlashError for VecFlashError {
    fn kind(&self) -> NorFlashErrorKind {
        match self {
            Self::NotAligned => NorFlashErrorKind::NotAligned,
            Self::OutOfBounds => NorFlashErrorKind::OutOfBounds,
            Self::BitSet { .. } => NorFlashErrorKind::Other,
        }
    }
}

/// NOR flash of `pages × ERASE` bytes with `READ`/`WRITE`/`ERASE` granularity, on the heap.
pub struct VecFlash<const READ: usize, const WRITE: usize, const ERASE: usize> {
    mem: Vec<u8>,
}

/// The geometry the demo devices use: byte reads, 4-byte words, 4 KiB pages.
pub type DeviceFlash = VecFlash<1, 4, 4096>;

impl<const READ: usize, const WRITE: usize, const ERASE: usize> VecFlash<READ, WRITE, ERASE> {
    /// Fully erased flash of `pages` pages.
    pub fn new(pages: usize) -> Self {
        Self {
            mem: vec![0xFF; pages * ERASE],
        }
    }
    /// The raw contents (a flash dump).
    pub fn image(&self) -> &[u8] {
        &self.mem
    }
    /// Mutable contents, to damage an image on purpose in tests.
    pub fn image_mut(&mut self) -> &mut [u8] {
        &mut self.mem
    }
    /// The firmware dump reader's geometry for this flash.
    pub fn geometry() -> Result<
        holdback_firmware::eventlog::dump::Geometry,
        holdback_firmware::eventlog::dump::GeometryError,
    > {
        holdback_firmware::eventlog::dump::Geometry::new(READ, WRITE, ERASE)
    }
    fn range(
        &self,
        offset: u32,
        len: usize,
        align: usize,
    ) -> Result<(usize, usize), VecFlashError> {
        let off = offset as usize;
        if !off.is_multiple_of(align) || !len.is_multiple_of(align) {
            return Err(VecFlashError::NotAligned);
        }
        let end = off.checked_add(len).ok_or(VecFlashError::OutOfBounds)?;
        if end > self.mem.len() {
            return Err(VecFlashError::OutOfBounds);
        }
        Ok((off, end))
    }
}

impl<const R: usize, const W: usize, const E: usize> ErrorType for VecFlash<R, W, E> {
    type Error = VecFlashError;
}

impl<const R: usize, const W: usize, const E: usize> ReadNorFlash for VecFlash<R, W, E> {
    const READ_SIZE: usize = R;
    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        let (a, b) = self.range(offset, bytes.len(), R)?;
        bytes.copy_from_slice(&self.mem[a..b]);
        Ok(())
    }
    fn capacity(&self) -> usize {
        self.mem.len()
    }
}

impl<const R: usize, const W: usize, const E: usize> NorFlash for VecFlash<R, W, E> {
    const WRITE_SIZE: usize = W;
    const ERASE_SIZE: usize = E;
    fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
        let len = (to as usize)
            .checked_sub(from as usize)
            .ok_or(VecFlashError::OutOfBounds)?;
        let (a, b) = self.range(from, len, E)?;
        self.mem[a..b].fill(0xFF);
        Ok(())
    }
    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        let (a, b) = self.range(offset, bytes.len(), W)?;
        if let Some(k) = self.mem[a..b]
            .iter()
            .zip(bytes)
            .position(|(old, new)| old & new != *new)
        {
            return Err(VecFlashError::BitSet { offset: a + k });
        }
        self.mem[a..b].copy_from_slice(bytes);
        Ok(())
    }
}

impl<const R: usize, const W: usize, const E: usize> MultiwriteNorFlash for VecFlash<R, W, E> {}

#[cfg(test)]
mod tests {
    use super::*;

    /// NOR rules: erased reads 0xFF, programming can only clear bits, access is aligned.
    #[test]
    fn nor_rules_hold() {
        let mut f = VecFlash::<1, 4, 256>::new(2);
        assert!(f.image().iter().all(|&b| b == 0xFF));
        f.write(4, &[0x0F, 0xF0, 0xFF, 0x00]).unwrap();
        assert_eq!(
            f.write(4, &[0xFF, 0, 0, 0]),
            Err(VecFlashError::BitSet { offset: 4 })
        );
        assert_eq!(f.write(2, &[0; 4]), Err(VecFlashError::NotAligned));
        assert_eq!(f.write(512, &[0; 4]), Err(VecFlashError::OutOfBounds));
        f.erase(0, 256).unwrap();
        assert!(f.image().iter().all(|&b| b == 0xFF));
        assert_eq!(f.erase(0, 100), Err(VecFlashError::NotAligned));
    }
}
