//! A NOR flash held in RAM that can lose power in the middle of an operation.
//!
//! [`MockFlash`] implements the `embedded-storage` NOR flash traits, blocking and async, with the
//! rules of real NOR flash: erase sets whole pages to `0xFF`, a write programs whole words and may
//! only target words that are still erased ("it is not allowed to write to the same word twice",
//! in the words of the `embedded-storage` trait docs). It is used by the power-loss tests and by
//! host simulations; firmware uses its MCU's flash driver instead.
//!
//! # Power cuts
//!
//! Every byte programmed and every byte erased is one *byte operation*. After
//! [`MockFlash::cut_power_after`]`(k)` the next `k` byte operations complete and the one after
//! them is torn: a byte being programmed gets only some of its zero bits (by default
//! `new | 0xAA`), a byte being erased gets only some of its one bits (by default `old | 0x55`),
//! which is one of the "undefined" outcomes the trait docs allow ([`MockFlash::with_tear`]
//! chooses other patterns). From then on every operation fails with
//! [`MockFlashError::PowerLost`] until [`MockFlash::restart`], which keeps the flash contents, as
//! a real flash keeps them across a reset. An erase proceeds from its lowest address upwards.
//! [`MockFlash::byte_ops`] counts the byte operations done so far, so that a test can measure how
//! long a save is and then cut the power at every position inside it.
//!
//! # Rewrites
//!
//! By default a write to a word that is not erased fails ([`MockFlashError::AlreadyWritten`]),
//! as on ECC flash. [`MockFlash::with_rewrite`] makes such a write AND the bits in instead, as
//! flash without ECC does (bits only go from 1 to 0).

use embedded_storage::nor_flash::{ErrorType, NorFlashError, NorFlashErrorKind};

/// What a [`MockFlash`] operation can fail with.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum MockFlashError {
    /// Power was lost during this operation or before it (see [`MockFlash::cut_power_after`]).
    PowerLost,
    /// The offset or length is not a multiple of the word (write) or page (erase) size.
    NotAligned,
    /// The range lies (partly) outside the flash.
    OutOfBounds,
    /// A write targeted a word that is not erased (NOR words are written once per erase).
    AlreadyWritten {
        /// Offset of the first word that was not erased.
        offset: u32,
    },
}

impl core::fmt::Display for MockFlashError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            MockFlashError::PowerLost => f.write_str("power lost"),
            MockFlashError::NotAligned => f.write_str("offset or length not aligned"),
            MockFlashError::OutOfBounds => f.write_str("range outside the flash"),
            MockFlashError::AlreadyWritten { offset } => {
                write!(f, "word at offset {offset} written twice without erase")
            }
        }
    }
}

impl core::error::Error for MockFlashError {}

impl NorFlashError for MockFlashError {
    fn kind(&self) -> NorFlashErrorKind {
        match self {
            MockFlashError::NotAligned => NorFlashErrorKind::NotAligned,
            MockFlashError::OutOfBounds => NorFlashErrorKind::OutOfBounds,
            MockFlashError::PowerLost | MockFlashError::AlreadyWritten { .. } => {
                NorFlashErrorKind::Other
            }
        }
    }
}

/// A NOR flash of `SIZE` bytes in pages of `PAGE` bytes, written in words of `WORD` bytes.
///
/// `SIZE` must be a multiple of `PAGE` and `PAGE` a multiple of `WORD` (checked at compile time).
/// The defaults (1 KiB pages, 4-byte words) are those of many small MCUs' internal flash.
#[derive(Clone, Debug)]
pub struct MockFlash<const SIZE: usize, const PAGE: usize = 1024, const WORD: usize = 4> {
    bytes: [u8; SIZE],
    /// Byte operations left before the power cut, if one is armed.
    cut_after: Option<u64>,
    powered: bool,
    byte_ops: u64,
    program_tear: u8,
    erase_tear: u8,
    rewrite: bool,
}

impl<const SIZE: usize, const PAGE: usize, const WORD: usize> Default
    for MockFlash<SIZE, PAGE, WORD>
{
    fn default() -> Self {
        Self::new()
    }
}

impl<const SIZE: usize, const PAGE: usize, const WORD: usize> MockFlash<SIZE, PAGE, WORD> {
    const GEOMETRY_OK: () = assert!(
        WORD > 0
            && PAGE > 0
            && PAGE.is_multiple_of(WORD)
            && SIZE.is_multiple_of(PAGE)
            && SIZE <= u32::MAX as usize,
        "MockFlash: SIZE must be a multiple of PAGE, PAGE a multiple of WORD"
    );

    /// A fully erased flash (every byte `0xFF`), powered, with no cut armed.
    pub const fn new() -> Self {
        Self::from_bytes([0xFF; SIZE])
    }

    /// A flash holding `bytes` (for example random contents left by other firmware).
    pub const fn from_bytes(bytes: [u8; SIZE]) -> Self {
        #[allow(clippy::let_unit_value)]
        let () = Self::GEOMETRY_OK;
        Self {
            bytes,
            cut_after: None,
            powered: true,
            byte_ops: 0,
            program_tear: 0xAA,
            erase_tear: 0x55,
            rewrite: false,
        }
    }

    /// The same flash with other tear patterns: a torn programmed byte becomes
    /// `new | program_mask`, a torn erased byte `old | erase_mask`.
    #[must_use]
    pub const fn with_tear(mut self, program_mask: u8, erase_mask: u8) -> Self {
        self.program_tear = program_mask;
        self.erase_tear = erase_mask;
        self
    }

    /// The same flash, accepting (`true`) or refusing (`false`, the default) writes to words
    /// that are not erased; accepted writes AND their bits in.
    #[must_use]
    pub const fn with_rewrite(mut self, allow: bool) -> Self {
        self.rewrite = allow;
        self
    }

    /// The flash contents.
    pub const fn bytes(&self) -> &[u8; SIZE] {
        &self.bytes
    }

    /// The flash contents, for tests that plant corruption.
    pub fn bytes_mut(&mut self) -> &mut [u8; SIZE] {
        &mut self.bytes
    }

    /// Arms a power cut: `k` more byte operations complete, the next one is torn and the power
    /// is lost (see the module docs).
    pub fn cut_power_after(&mut self, k: u64) {
        self.cut_after = Some(k);
    }

    /// Power comes back: the contents are kept, any armed cut is cleared.
    pub fn restart(&mut self) {
        self.powered = true;
        self.cut_after = None;
    }

    /// Whether power has been lost (and [`MockFlash::restart`] not yet called).
    pub const fn is_powered_off(&self) -> bool {
        !self.powered
    }

    /// Byte operations (bytes programmed plus bytes erased) done since creation.
    pub const fn byte_ops(&self) -> u64 {
        self.byte_ops
    }

    /// Consumes one byte operation; `false` if this operation is the one that loses power.
    fn tick(&mut self) -> bool {
        match self.cut_after {
            Some(0) => {
                self.cut_after = None;
                self.powered = false;
                false
            }
            Some(left) => {
                self.cut_after = Some(left.saturating_sub(1));
                self.byte_ops = self.byte_ops.saturating_add(1);
                true
            }
            None => {
                self.byte_ops = self.byte_ops.saturating_add(1);
                true
            }
        }
    }

    fn range(offset: u32, len: usize) -> Result<core::ops::Range<usize>, MockFlashError> {
        let start = usize::try_from(offset).map_err(|_| MockFlashError::OutOfBounds)?;
        let end = start.checked_add(len).ok_or(MockFlashError::OutOfBounds)?;
        if end > SIZE {
            return Err(MockFlashError::OutOfBounds);
        }
        Ok(start..end)
    }

    /// Reads `out.len()` bytes at `offset`.
    pub fn read_at(&mut self, offset: u32, out: &mut [u8]) -> Result<(), MockFlashError> {
        if !self.powered {
            return Err(MockFlashError::PowerLost);
        }
        let range = Self::range(offset, out.len())?;
        let src = self.bytes.get(range).ok_or(MockFlashError::OutOfBounds)?;
        out.copy_from_slice(src);
        Ok(())
    }

    /// Programs `data` at `offset` (whole, erased words only).
    pub fn program(&mut self, offset: u32, data: &[u8]) -> Result<(), MockFlashError> {
        if !self.powered {
            return Err(MockFlashError::PowerLost);
        }
        let range = Self::range(offset, data.len())?;
        if !range.start.is_multiple_of(WORD) || !data.len().is_multiple_of(WORD) {
            return Err(MockFlashError::NotAligned);
        }
        let target = self
            .bytes
            .get(range.clone())
            .ok_or(MockFlashError::OutOfBounds)?;
        for (i, word) in target.chunks(WORD).enumerate() {
            if !self.rewrite && word.iter().any(|b| *b != 0xFF) {
                let at = range.start.saturating_add(i.saturating_mul(WORD));
                return Err(MockFlashError::AlreadyWritten {
                    offset: u32::try_from(at).unwrap_or(u32::MAX),
                });
            }
        }
        for (index, value) in range.zip(data.iter().copied()) {
            let live = self.tick();
            if let Some(byte) = self.bytes.get_mut(index) {
                // NOR programming can only clear bits; a torn byte gets some of them.
                *byte &= if live {
                    value
                } else {
                    value | self.program_tear
                };
            }
            if !live {
                return Err(MockFlashError::PowerLost);
            }
        }
        Ok(())
    }

    /// Erases the pages in `from..to` (both page-aligned), lowest address first.
    pub fn erase_range(&mut self, from: u32, to: u32) -> Result<(), MockFlashError> {
        if !self.powered {
            return Err(MockFlashError::PowerLost);
        }
        let len = to.checked_sub(from).ok_or(MockFlashError::OutOfBounds)?;
        let range = Self::range(from, len as usize)?;
        if !range.start.is_multiple_of(PAGE) || !range.end.is_multiple_of(PAGE) {
            return Err(MockFlashError::NotAligned);
        }
        for index in range {
            let live = self.tick();
            if let Some(byte) = self.bytes.get_mut(index) {
                *byte = if live { 0xFF } else { *byte | self.erase_tear };
            }
            if !live {
                return Err(MockFlashError::PowerLost);
            }
        }
        Ok(())
    }
}

impl<const SIZE: usize, const PAGE: usize, const WORD: usize> ErrorType
    for MockFlash<SIZE, PAGE, WORD>
{
    type Error = MockFlashError;
}

impl<const SIZE: usize, const PAGE: usize, const WORD: usize>
    embedded_storage::nor_flash::ReadNorFlash for MockFlash<SIZE, PAGE, WORD>
{
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        self.read_at(offset, bytes)
    }

    fn capacity(&self) -> usize {
        SIZE
    }
}

impl<const SIZE: usize, const PAGE: usize, const WORD: usize> embedded_storage::nor_flash::NorFlash
    for MockFlash<SIZE, PAGE, WORD>
{
    const WRITE_SIZE: usize = WORD;
    const ERASE_SIZE: usize = PAGE;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
        self.erase_range(from, to)
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        self.program(offset, bytes)
    }
}

impl<const SIZE: usize, const PAGE: usize, const WORD: usize>
    embedded_storage_async::nor_flash::ReadNorFlash for MockFlash<SIZE, PAGE, WORD>
{
    const READ_SIZE: usize = 1;

    async fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        self.read_at(offset, bytes)
    }

    fn capacity(&self) -> usize {
        SIZE
    }
}

impl<const SIZE: usize, const PAGE: usize, const WORD: usize>
    embedded_storage_async::nor_flash::NorFlash for MockFlash<SIZE, PAGE, WORD>
{
    const WRITE_SIZE: usize = WORD;
    const ERASE_SIZE: usize = PAGE;

    async fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
        self.erase_range(from, to)
    }

    async fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        self.program(offset, bytes)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    type Flash = MockFlash<256, 64, 4>;

    #[test]
    fn write_once_per_erase() {
        let mut f = Flash::new();
        f.program(4, &[1, 2, 3, 4]).unwrap();
        assert_eq!(
            f.program(4, &[1, 2, 3, 4]),
            Err(MockFlashError::AlreadyWritten { offset: 4 })
        );
        assert_eq!(f.program(2, &[0; 4]), Err(MockFlashError::NotAligned));
        assert_eq!(f.program(256, &[0; 4]), Err(MockFlashError::OutOfBounds));
        f.erase_range(0, 64).unwrap();
        f.program(4, &[1, 2, 3, 4]).unwrap();
        let mut out = [0; 4];
        f.read_at(4, &mut out).unwrap();
        assert_eq!(out, [1, 2, 3, 4]);
    }

    #[test]
    fn cut_tears_one_byte_then_keeps_power_off_until_restart() {
        let mut f = Flash::new();
        f.cut_power_after(2);
        assert_eq!(
            f.program(0, &[0x00, 0x00, 0x00, 0x00]),
            Err(MockFlashError::PowerLost)
        );
        assert!(f.is_powered_off());
        assert_eq!(f.bytes()[..4], [0x00, 0x00, 0xAA, 0xFF]);
        assert_eq!(f.byte_ops(), 2);
        let mut out = [0; 1];
        assert_eq!(f.read_at(0, &mut out), Err(MockFlashError::PowerLost));
        f.restart();
        f.read_at(2, &mut out).unwrap();
        assert_eq!(out, [0xAA]);
    }

    #[test]
    fn rewrite_and_tear_options() {
        let mut f = Flash::new().with_rewrite(true).with_tear(0xFE, 0x01);
        f.program(0, &[0xF0; 4]).unwrap();
        f.program(0, &[0x3C; 4]).unwrap();
        assert_eq!(f.bytes()[..4], [0x30; 4]);
        f.cut_power_after(0);
        assert_eq!(f.program(4, &[0; 4]), Err(MockFlashError::PowerLost));
        assert_eq!(f.bytes()[4], 0xFE);
    }

    #[test]
    fn interrupted_erase_leaves_the_upper_part_of_the_page() {
        let mut f = Flash::from_bytes([0u8; 256]);
        f.cut_power_after(10);
        assert_eq!(f.erase_range(0, 64), Err(MockFlashError::PowerLost));
        f.restart();
        assert!(f.bytes()[..10].iter().all(|b| *b == 0xFF));
        assert_eq!(f.bytes()[10], 0x55);
        assert!(f.bytes()[11..].iter().all(|b| *b == 0));
        assert_eq!(f.erase_range(0, 32), Err(MockFlashError::NotAligned));
    }
}
