//! Storage traits of our own, and their implementation over `sequential-storage` on NOR flash.
//!
//! Two small traits say what the typed layer needs and nothing more:
//!
//! - [`RecordMap`]: the latest record under a [`RecordKey`] (a record kind and a channel);
//!   calibrations and method settings live here.
//! - [`RecordRing`]: records appended in order, the oldest dropped when space runs out; the
//!   result log lives here.
//!
//! [`FlashStore`] implements both over one NOR flash device (anything implementing the
//! `embedded-storage-async` `NorFlash` trait; wrap a blocking HAL driver in
//! [`BlockingFlash`](super::BlockingFlash)). It gives two page ranges to `sequential-storage`
//! (major version 8, pinned): its map for the keyed records and its queue for the ring, and it
//! drives their async operations with [`block_on`](super::block_on), so every call here blocks
//! until the flash work is done. Wear levelling, power-fail safety of the flash layout and the
//! skipping of half-written items are that library's; our record CRC checks every byte again.
//!
//! No cache is used: each operation scans the flash (a few pages), which keeps the RAM of the
//! store to one scratch buffer and makes it safe to rebuild the store after any reset.

use core::cell::Cell;
use core::ops::{ControlFlow, Range};

use embedded_storage_async::nor_flash::{NorFlash, NorFlashError, NorFlashErrorKind};
use sequential_storage::cache::{Cache, Uncached};
use sequential_storage::map::{MapConfig, MapStorage, SerializationError, Value};
use sequential_storage::queue::{QueueConfig, QueueStorage};

use super::block_on;
use super::record::{DecodeError, EncodeError, RecordKind};
use super::{CalibrationRecord, MethodSettings, ResultEntry};

/// A value that encodes itself as one framed record (implemented by the record types).
pub trait Encode {
    /// Encodes into `buf`; returns the bytes used.
    fn encode_record(&self, buf: &mut [u8]) -> Result<usize, EncodeError>;
}

impl Encode for MethodSettings {
    fn encode_record(&self, buf: &mut [u8]) -> Result<usize, EncodeError> {
        self.encode(buf)
    }
}

impl Encode for ResultEntry {
    fn encode_record(&self, buf: &mut [u8]) -> Result<usize, EncodeError> {
        self.encode(buf)
    }
}

impl Encode for CalibrationRecord {
    fn encode_record(&self, buf: &mut [u8]) -> Result<usize, EncodeError> {
        self.encode(buf)
    }
}

/// Key of a record in a [`RecordMap`]: what it is and which channel it belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RecordKey {
    /// The record kind.
    pub kind: RecordKind,
    /// The channel.
    pub channel: u8,
}

impl RecordKey {
    /// The key as stored in flash: kind byte high, channel low.
    pub const fn to_u16(self) -> u16 {
        ((self.kind as u16) << 8) | self.channel as u16
    }
}

/// Why a storage operation failed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum StoreError {
    /// The flash driver reported an error (a power loss shows as `Other`).
    Flash(NorFlashErrorKind),
    /// The map is full: the latest records of all keys do not fit in its pages (see the
    /// capacity rules in the [`persistence`](super) docs).
    Full,
    /// The flash layout is damaged beyond what the library could repair; erase the range.
    Corrupted,
    /// The record can never fit in one page of this flash.
    TooBig,
    /// The record could not be encoded.
    Encode(EncodeError),
    /// An internal inconsistency (a bug in lumisorb or the flash library); please report.
    Internal,
}

impl core::fmt::Display for StoreError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            StoreError::Flash(kind) => write!(f, "flash error: {kind}"),
            StoreError::Full => f.write_str("storage full"),
            StoreError::Corrupted => f.write_str("storage corrupted beyond repair"),
            StoreError::TooBig => f.write_str("record too big for a flash page"),
            StoreError::Encode(e) => write!(f, "cannot encode record: {e}"),
            StoreError::Internal => f.write_str("internal storage error"),
        }
    }
}

impl core::error::Error for StoreError {}

impl<E: NorFlashError> From<sequential_storage::Error<E>> for StoreError {
    fn from(e: sequential_storage::Error<E>) -> Self {
        match e {
            sequential_storage::Error::Storage { value, .. } => StoreError::Flash(value.kind()),
            sequential_storage::Error::FullStorage => StoreError::Full,
            sequential_storage::Error::Corrupted { .. } => StoreError::Corrupted,
            sequential_storage::Error::ItemTooBig => StoreError::TooBig,
            _ => StoreError::Internal,
        }
    }
}

/// Why a typed record could not be loaded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LoadError {
    /// The storage failed.
    Store(StoreError),
    /// The stored bytes are not a valid record of the kind asked for.
    Record(DecodeError),
}

impl core::fmt::Display for LoadError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            LoadError::Store(e) => write!(f, "{e}"),
            LoadError::Record(e) => write!(f, "stored record invalid: {e}"),
        }
    }
}

impl core::error::Error for LoadError {}

impl From<StoreError> for LoadError {
    fn from(e: StoreError) -> Self {
        LoadError::Store(e)
    }
}

impl From<DecodeError> for LoadError {
    fn from(e: DecodeError) -> Self {
        LoadError::Record(e)
    }
}

/// Fetches the record stored under `key` and decodes it; a record that decodes but names
/// another channel than its key is refused like a damaged one. The one loading path of every
/// per-channel record (calibrations, method settings).
pub(crate) fn load_channel_record<M: RecordMap, R>(
    map: &mut M,
    key: RecordKey,
    decode: fn(&[u8]) -> Result<R, DecodeError>,
    channel_of: fn(&R) -> u8,
) -> Result<Option<R>, LoadError> {
    match map.fetch_record(key, decode)? {
        None => Ok(None),
        Some(Err(e)) => Err(LoadError::Record(e)),
        Some(Ok(r)) if channel_of(&r) != key.channel => {
            Err(LoadError::Record(DecodeError::OutOfRange {
                field: "channel",
            }))
        }
        Some(Ok(r)) => Ok(Some(r)),
    }
}

/// Latest record per key.
pub trait RecordMap {
    /// Stores `record` under `key`, replacing the previous one only once the new one is
    /// complete: after a power loss at any point, the key holds the old or the new record.
    fn store_record(&mut self, key: RecordKey, record: &dyn Encode) -> Result<(), StoreError>;

    /// Hands the bytes of the latest record under `key` to `read`; `None` if there is none.
    fn fetch_record<T>(
        &mut self,
        key: RecordKey,
        read: impl FnOnce(&[u8]) -> T,
    ) -> Result<Option<T>, StoreError>;
}

/// Records in append order; the oldest are dropped when space runs out.
pub trait RecordRing {
    /// Appends `record`; after a power loss the ring holds it whole or not at all.
    fn append_record(&mut self, record: &dyn Encode) -> Result<(), StoreError>;

    /// Hands every record, oldest first, to `visit` until it breaks.
    fn visit_records(
        &mut self,
        visit: impl FnMut(&[u8]) -> ControlFlow<()>,
    ) -> Result<(), StoreError>;

    /// Drops every record.
    fn clear_records(&mut self) -> Result<(), StoreError>;
}

/// Page ranges of one flash device given to the map and to the ring (byte offsets in the
/// driver's address space, page-aligned, not overlapping; the map needs at least 2 pages, the
/// ring at least 1).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct StoreLayout {
    /// Pages for calibrations and method settings.
    pub map: Range<u32>,
    /// Pages for the result log.
    pub log: Range<u32>,
}

/// Why a [`StoreLayout`] does not suit a flash.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LayoutError {
    /// The map range is not page-aligned or shorter than 2 pages.
    MapRange,
    /// The log range is not page-aligned or shorter than 1 page.
    LogRange,
    /// The two ranges overlap.
    Overlap,
    /// A range extends past the end of the flash.
    OutsideFlash,
    /// A page cannot hold the largest record (a calibration).
    PagesTooSmall,
    /// The flash word is larger than the store's scratch alignment allows (32 bytes).
    WordTooLarge,
}

impl core::fmt::Display for LayoutError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            LayoutError::MapRange => "map range not page-aligned or under 2 pages",
            LayoutError::LogRange => "log range not page-aligned or under 1 page",
            LayoutError::Overlap => "map and log ranges overlap",
            LayoutError::OutsideFlash => "range outside the flash",
            LayoutError::PagesTooSmall => "flash pages too small for a calibration record",
            LayoutError::WordTooLarge => "flash word over 32 bytes",
        })
    }
}

impl core::error::Error for LayoutError {}

/// Bytes of the map key in flash.
pub const KEY_LEN: usize = 2;

/// The largest record any store holds (a calibration with a full set of standards).
pub const MAX_RECORD_LEN: usize = max3(
    CalibrationRecord::MAX_ENCODED_LEN,
    MethodSettings::ENCODED_LEN,
    ResultEntry::MAX_ENCODED_LEN,
);

const fn max3(a: usize, b: usize, c: usize) -> usize {
    let ab = if a > b { a } else { b };
    if ab > c {
        ab
    } else {
        c
    }
}

/// Size of the store's scratch buffer: key plus largest record, rounded up to 32 bytes (the
/// largest flash word `sequential-storage` supports).
pub const SCRATCH_LEN: usize = (KEY_LEN + MAX_RECORD_LEN).div_ceil(32) * 32;

/// Word-aligned scratch (some flash drivers need aligned RAM buffers).
#[derive(Clone)]
#[repr(C, align(4))]
struct Scratch([u8; SCRATCH_LEN]);

type NoCache = Cache<Uncached, Uncached, Uncached, u16>;
type NoQueueCache = Cache<Uncached, Uncached, Uncached, ()>;

/// Calibrations, method settings and the result log on one NOR flash (see the module docs).
///
/// RAM: the flash driver plus two ranges plus [`SCRATCH_LEN`] bytes of scratch
/// (`size_of::<FlashStore<F>>()`; the figures are in the [`persistence`](super) docs).
pub struct FlashStore<F: NorFlash> {
    flash: F,
    map: Range<u32>,
    log: Range<u32>,
    scratch: Scratch,
}

impl<F: NorFlash> core::fmt::Debug for FlashStore<F> {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.debug_struct("FlashStore")
            .field("map", &self.map)
            .field("log", &self.log)
            .finish_non_exhaustive()
    }
}

/// The flash as the library sees it: reads in whole flash words.
///
/// `sequential-storage` decides whether a page is closed from `READ_SIZE` bytes at the page's
/// end, while the end marker it writes is a whole word. On a flash that reads bytes
/// (`READ_SIZE` 1) but writes words of 4, 8 or 32 bytes, a power cut inside the marker word
/// leaves its last byte erased: the page looks open, and the library writes the marker word a
/// second time, which ECC flash (many STM32 families) refuses, so every later save would fail.
/// The power-loss tests found this. Presenting `READ_SIZE` = the write word makes the library
/// read the whole marker word, so a partly written marker counts as written when it has at
/// least 4 programmed bits (the library's threshold; the second measure covers the rest).
/// Every read stays a multiple of the driver's own `READ_SIZE`
/// because the library requires write and read sizes to be multiples of each other.
///
/// Second, page markers are read as all-or-nothing: the first and the last word of a page are
/// only ever written by the library as its page-state markers (all zero bytes), so a marker
/// word with any programmed bit is a marker whose write began, and it is handed to the library
/// as fully written. Without this, a marker torn with fewer than 4 programmed bits (the
/// library's threshold, meant to survive a stray bit flip) looked unwritten and was programmed
/// a second time, which write-once flash refuses. On ECC flash a stray bit flip is corrected
/// by the hardware; elsewhere a flipped bit in an erased page's marker makes the library see an
/// inconsistent page and repair it (re-erase), which the random start-up tests exercise.
struct WholeWords<'f, F>(&'f mut F);

impl<F: NorFlash> WholeWords<'_, F> {
    /// Sets every page-marker word inside `bytes` (read at `offset`) that has any programmed
    /// bit to all zeros.
    fn normalise_markers(offset: u32, bytes: &mut [u8]) {
        let word = word_of::<F>();
        let page = F::ERASE_SIZE;
        if word == 0 || page < 2 * word {
            return;
        }
        let start = offset as usize;
        // Word-aligned reads only (the library reads in multiples of `READ_SIZE` = word).
        if !start.is_multiple_of(word) {
            return;
        }
        for (i, chunk) in bytes.chunks_mut(word).enumerate() {
            let at = start.saturating_add(i.saturating_mul(word));
            let in_page = at % page;
            let is_marker = in_page == 0 || in_page == page - word;
            if is_marker && chunk.len() == word && chunk.iter().any(|b| *b != 0xFF) {
                chunk.fill(0);
            }
        }
    }
}

const fn word_of<F: NorFlash>() -> usize {
    if F::WRITE_SIZE > F::READ_SIZE {
        F::WRITE_SIZE
    } else {
        F::READ_SIZE
    }
}

impl<F: NorFlash> embedded_storage_async::nor_flash::ErrorType for WholeWords<'_, F> {
    type Error = F::Error;
}

impl<F: NorFlash> embedded_storage_async::nor_flash::ReadNorFlash for WholeWords<'_, F> {
    const READ_SIZE: usize = word_of::<F>();

    async fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        self.0.read(offset, bytes).await?;
        Self::normalise_markers(offset, bytes);
        Ok(())
    }

    fn capacity(&self) -> usize {
        self.0.capacity()
    }
}

impl<F: NorFlash> NorFlash for WholeWords<'_, F> {
    const WRITE_SIZE: usize = F::WRITE_SIZE;
    const ERASE_SIZE: usize = F::ERASE_SIZE;

    async fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
        self.0.erase(from, to).await
    }

    async fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        self.0.write(offset, bytes).await
    }
}

/// The map and queue views over borrowed flash (built per operation; they hold no state).
fn map_over<F: NorFlash>(
    flash: &mut F,
    range: Range<u32>,
) -> Result<MapStorage<u16, WholeWords<'_, F>, NoCache>, StoreError> {
    let config = MapConfig::try_new(range).map_err(|_| StoreError::Internal)?;
    Ok(MapStorage::new(
        WholeWords(flash),
        config,
        Cache::new_uncached(),
    ))
}

fn queue_over<F: NorFlash>(
    flash: &mut F,
    range: Range<u32>,
) -> Result<QueueStorage<WholeWords<'_, F>, NoQueueCache>, StoreError> {
    let config = QueueConfig::try_new(range).map_err(|_| StoreError::Internal)?;
    Ok(QueueStorage::new(
        WholeWords(flash),
        config,
        Cache::new_uncached(),
    ))
}

impl<F: NorFlash> FlashStore<F> {
    /// A store over `flash` with `layout`. Nothing is written: existing contents are used as
    /// they are (use [`FlashStore::erase_all`] for a fresh start).
    pub fn new(flash: F, layout: StoreLayout) -> Result<Self, LayoutError> {
        let StoreLayout { map, log } = layout;
        if F::WRITE_SIZE > 32 || F::READ_SIZE > 32 {
            return Err(LayoutError::WordTooLarge);
        }
        MapConfig::<F>::try_new(map.clone()).map_err(|_| LayoutError::MapRange)?;
        QueueConfig::<F>::try_new(log.clone()).map_err(|_| LayoutError::LogRange)?;
        if map.start < log.end && log.start < map.end {
            return Err(LayoutError::Overlap);
        }
        let capacity = flash.capacity();
        let fits = |r: &Range<u32>| usize::try_from(r.end).is_ok_and(|end| end <= capacity);
        if !fits(&map) || !fits(&log) {
            return Err(LayoutError::OutsideFlash);
        }
        if Self::max_item_data() < KEY_LEN + MAX_RECORD_LEN {
            return Err(LayoutError::PagesTooSmall);
        }
        Ok(FlashStore {
            flash,
            map,
            log,
            scratch: Scratch([0; SCRATCH_LEN]),
        })
    }

    /// Largest item data (key + record) one page of this flash holds.
    fn max_item_data() -> usize {
        let word = F::WRITE_SIZE.max(F::READ_SIZE);
        let overhead = MapStorage::<u16, F, NoCache>::item_overhead_size() as usize;
        F::ERASE_SIZE
            .saturating_sub(2 * word)
            .saturating_sub(overhead)
    }

    /// Bytes one stored item of `data_len` bytes takes in flash (header and word padding).
    pub fn item_footprint(data_len: usize) -> usize {
        let word = F::WRITE_SIZE.max(F::READ_SIZE).max(1);
        let overhead = MapStorage::<u16, F, NoCache>::item_overhead_size() as usize;
        overhead.saturating_add(data_len.div_ceil(word).saturating_mul(word))
    }

    /// How many items of `data_len` bytes fit in one page of this flash.
    pub fn items_per_page(data_len: usize) -> usize {
        let word = F::WRITE_SIZE.max(F::READ_SIZE);
        let usable = F::ERASE_SIZE.saturating_sub(2 * word);
        usable
            .checked_div(Self::item_footprint(data_len))
            .unwrap_or(0)
    }

    /// Erases both ranges: every calibration, setting and logged result is gone.
    pub fn erase_all(&mut self) -> Result<(), StoreError> {
        block_on(self.flash.erase(self.map.start, self.map.end))
            .map_err(|e| StoreError::Flash(e.kind()))?;
        block_on(self.flash.erase(self.log.start, self.log.end))
            .map_err(|e| StoreError::Flash(e.kind()))
    }

    /// The flash driver.
    pub fn flash_mut(&mut self) -> &mut F {
        &mut self.flash
    }

    /// Gives the flash driver back.
    pub fn into_flash(self) -> F {
        self.flash
    }
}

/// Lets `sequential-storage` serialize a record straight into its buffer.
struct Encoded<'r> {
    record: &'r dyn Encode,
    error: Cell<Option<EncodeError>>,
}

impl<'a> Value<'a> for Encoded<'_> {
    fn serialize_into(&self, buffer: &mut [u8]) -> Result<usize, SerializationError> {
        self.record.encode_record(buffer).map_err(|e| {
            self.error.set(Some(e));
            SerializationError::InvalidData
        })
    }

    fn deserialize_from(_buffer: &'a [u8]) -> Result<(Self, usize), SerializationError> {
        Err(SerializationError::InvalidFormat)
    }
}

impl<F: NorFlash> RecordMap for FlashStore<F> {
    fn store_record(&mut self, key: RecordKey, record: &dyn Encode) -> Result<(), StoreError> {
        let mut map = map_over(&mut self.flash, self.map.clone())?;
        let value = Encoded {
            record,
            error: Cell::new(None),
        };
        let result = block_on(map.store_item(&mut self.scratch.0, &key.to_u16(), &value));
        if let Some(e) = value.error.get() {
            return Err(StoreError::Encode(e));
        }
        result.map_err(StoreError::from)
    }

    fn fetch_record<T>(
        &mut self,
        key: RecordKey,
        read: impl FnOnce(&[u8]) -> T,
    ) -> Result<Option<T>, StoreError> {
        let mut map = map_over(&mut self.flash, self.map.clone())?;
        let found = block_on(map.fetch_item::<&[u8]>(&mut self.scratch.0, &key.to_u16()))?;
        Ok(found.map(read))
    }
}

impl<F: NorFlash> RecordRing for FlashStore<F> {
    fn append_record(&mut self, record: &dyn Encode) -> Result<(), StoreError> {
        let n = record
            .encode_record(&mut self.scratch.0)
            .map_err(StoreError::Encode)?;
        let data = self.scratch.0.get(..n).ok_or(StoreError::Internal)?;
        let mut queue = queue_over(&mut self.flash, self.log.clone())?;
        block_on(queue.push(data, true)).map_err(StoreError::from)
    }

    fn visit_records(
        &mut self,
        mut visit: impl FnMut(&[u8]) -> ControlFlow<()>,
    ) -> Result<(), StoreError> {
        let mut queue = queue_over(&mut self.flash, self.log.clone())?;
        let scratch = &mut self.scratch.0;
        block_on(async {
            let mut iter = queue.iter().await?;
            while let Some(entry) = iter.next(scratch).await? {
                if visit(&entry).is_break() {
                    break;
                }
            }
            Ok::<(), sequential_storage::Error<F::Error>>(())
        })
        .map_err(StoreError::from)
    }

    fn clear_records(&mut self) -> Result<(), StoreError> {
        block_on(self.flash.erase(self.log.start, self.log.end))
            .map_err(|e| StoreError::Flash(e.kind()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::persistence::MockFlash;

    #[test]
    fn torn_page_markers_read_as_written() {
        type F = MockFlash<256, 64, 4>;
        let mut buf = [0xFF, 0xFE, 0xFF, 0xFF, 0x12, 0x34, 0x56, 0x78];
        // A read at a page start: its marker word has one programmed bit; the next word is data.
        WholeWords::<F>::normalise_markers(64, &mut buf);
        assert_eq!(buf, [0, 0, 0, 0, 0x12, 0x34, 0x56, 0x78]);
        // The last word of a page, torn; an erased marker stays erased.
        let mut end = [0xFF, 0xFF, 0xFF, 0x7F];
        WholeWords::<F>::normalise_markers(60, &mut end);
        assert_eq!(end, [0; 4]);
        let mut erased = [0xFF; 4];
        WholeWords::<F>::normalise_markers(124, &mut erased);
        assert_eq!(erased, [0xFF; 4]);
        // Data words inside a page are never touched.
        let mut data = [0xFE, 0xFF, 0xFF, 0xFF];
        WholeWords::<F>::normalise_markers(8, &mut data);
        assert_eq!(data, [0xFE, 0xFF, 0xFF, 0xFF]);
    }
}
