//! Persistence: calibrations, method settings and a result log kept in NOR flash, surviving
//! power loss.
//!
//! The top layer: it stores what the layers below produce and never computes chemistry itself
//! (a stored calibration is refitted by [`crate::calibration`] on load).
//!
//! - **Records** ([`record`]): each value is a framed, versioned, little-endian record with a
//!   CRC-32/ISO-HDLC, encoded into a caller's buffer and decoded with a typed [`DecodeError`]
//!   for every kind of damage (truncated, bad magic, bad CRC, unknown version, out of range,
//!   non-finite, refit mismatch). Three kinds: [`CalibrationRecord`] (standards, model,
//!   weighting, σ source, fit results, method and revision, path length, creation time and
//!   counter; refitted and verified on load), [`MethodSettings`], and [`ResultEntry`].
//! - **Storage** ([`RecordMap`], [`RecordRing`]): two small traits of our own;
//!   [`FlashStore`] implements both over any `embedded-storage-async` NOR flash with
//!   `sequential-storage` 8 (its map holds the latest calibration and settings per channel, its
//!   queue is the result log ring), driven by the blocking adapter [`block_on`] /
//!   [`BlockingFlash`]. No feature gate: it builds for `thumbv7em-none-eabihf` and
//!   `thumbv6m-none-eabi` (no atomics needed).
//! - **Exports**: the log as CSV ([`export_csv`]) or as recorded-session comments
//!   ([`export_session`]) over any `core::fmt::Write`.
//! - **Staleness** ([`Staleness`]): too old, clock behind, other path length or other method
//!   revision gives [`Flag::StaleCalibration`](crate::Flag::StaleCalibration).
//! - **Testing** ([`MockFlash`]): a NOR flash in RAM that loses power after any byte.
//!
//! ```
//! use lumisorb::persistence::*;
//! use lumisorb::{Absorbance, Flags};
//!
//! // Map in pages 0-3, log in pages 4-5 of a 6 KiB flash with 1 KiB pages.
//! let layout = StoreLayout { map: 0..4096, log: 4096..6144 };
//! let mut store = FlashStore::new(MockFlash::<6144>::new(), layout.clone()).unwrap();
//! let settings = MethodSettings {
//!     channel: 0, method: MethodId { id: 4, version: 1 }, wavelength_nm: 630,
//!     path_length_mm: 10.0, lit_reads: 16, dark_reads: 8, stray_fraction: 0.0,
//!     use_reference: false, dilution_factor: 1.0, max_calibration_age_s: 7 * 86_400,
//! };
//! settings.save(&mut store).unwrap();
//! let result = ResultEntry {
//!     time_s: 1_000, sample: SampleId::new("SITE-2").unwrap(), channel: 0,
//!     method: settings.method, absorbance: Absorbance::new(0.25).unwrap(),
//!     absorbance_sd: 0.002, concentration: None, flags: Flags::NONE,
//! };
//! result.append(&mut store).unwrap();
//!
//! // After a reset: the same flash, a new store.
//! let mut store = FlashStore::new(store.into_flash(), layout).unwrap();
//! assert_eq!(MethodSettings::load(&mut store, 0), Ok(Some(settings)));
//! let mut csv = String::new();
//! let summary = export_csv(&mut store, &mut csv).unwrap();
//! assert_eq!((summary.exported, summary.unreadable), (1, 0));
//! assert!(csv.ends_with("1000,SITE-2,0,4,1,0.25,0.002,,,,\n"));
//! ```
//!
//! # Capacity
//!
//! `sequential-storage` keeps two page-state words per page and writes each record as an item:
//! an 8-byte header and the data, each rounded up to the flash word `W`; map items also hold
//! the 2-byte key ([`KEY_LEN`]). An item never spans pages. So a page of `S` bytes holds
//! `floor((S - 2 W) / (round_up(8, W) + round_up(data, W)))` items
//! ([`FlashStore::items_per_page`]).
//!
//! | page, word | calibration, 6 standards (163 B) | calibration, 16 standards + blank σ (309 B) | method settings (38 B) | log entry (32..59 B) |
//! |---|---|---|---|---|
//! | 1 KiB, 4 B | 5 | 3 | 21 | 14..25 |
//! | 2 KiB, 8 B | 11 | 6 | 42 | 28..50 |
//! | 4 KiB, 4 B | 23 | 12 | 85 | 60..102 |
//!
//! - **Map** (`P` pages): one page is always kept erased for the library's garbage collection,
//!   and an update needs one free slot besides the live records, so the latest records of all
//!   keys must fit in `(P - 1) * per_page - 1` slots (records of mixed sizes: sum their
//!   footprints against `(P - 1)` pages). Example: 4 pages of 1 KiB hold 8 full calibrations
//!   (16 standards), or 4 calibrations with 6 standards plus their 4 method settings with room
//!   to spare; beyond that a save fails with [`StoreError::Full`] and nothing stored is lost.
//!   Checked by `tests/persistence_store.rs`.
//! - **Log** (`P` pages): at least `(P - 1) * per_page` of the newest entries are kept (when the
//!   ring wraps, the page with the oldest entries is erased), at most `P * per_page`. Example:
//!   2 pages of 2 KiB keep at least 28 entries with 16-character ids and concentrations.
//!
//! Every page erase goes to the page the library picks next in its cycle, so wear is spread
//! evenly over each range.
//!
//! # Power loss
//!
//! Proved by `tests/persistence_power_loss.rs` on [`MockFlash`]: for every byte operation `k`
//! from 0 to the end of a calibration save (14 to 26 successive saves, so that cuts also land
//! in page closes, erases and migrations of other records; saves of up to 2 800 byte
//! operations), power is cut after `k` operations and the flash restarted. Every time the
//! channel's calibration loads intact (CRC, refit) and is the old one or the new one, never
//! none when one existed; the other channels' calibrations and settings are untouched; and
//! the store accepts the next save. The same for log appends: no half-written entry is ever
//! returned, the entries read back are a gap-free run ending with the last complete append,
//! and the log accepts the next append. Flash variants: write-once words (ECC flash) with
//! 1 KiB pages and 4-byte words (7 962 cut points), with 2 KiB pages and 8-byte words
//! (12 922), write-once words whose torn bytes get a single bit (7 962), and rewritable flash
//! with such tears (7 962); log appends 5 514 to 11 073 cut points per variant.
//!
//! What the tests taught (both fixed in the store's view of the flash, see `store.rs`):
//!
//! - `sequential-storage` judges whether a page is closed from `READ_SIZE` bytes at its end,
//!   while its marker is a whole write word. With a byte-reading driver (`READ_SIZE` 1) and a
//!   cut inside the marker word, the page looked open and the marker word was programmed a
//!   second time, which write-once (ECC) flash refuses, and every later save failed. The store
//!   therefore presents `READ_SIZE` = write word to the library (its reads stay valid for the
//!   driver).
//! - Even read whole, a marker word torn with fewer than 4 programmed bits (the library's
//!   threshold) looked unwritten, with the same result (10 of 7 782 cut points with
//!   single-bit tears). The store hands the library every page-marker word with any programmed
//!   bit as fully written: those words are only ever written as markers, so a begun write
//!   means the library asked for it.
//! - A damaged newest record (a bit flip) is skipped by the library's item CRC, and the
//!   previous version of the key is returned: an intact older calibration, recognisable by its
//!   `created_s` and `sequence`.
//! - Random flash contents at start-up (noise, all zeros, fake page markers, damaged stores):
//!   typed errors or an empty or partly readable store, never a panic; after
//!   [`FlashStore::erase_all`] the store always works (`tests/persistence_random_flash.rs`;
//!   600 images in CI, 30 000 run once).
//!
//! # Budgets (thumbv7em-none-eabihf, release, `opt-level = "z"`, LTO)
//!
//! Measured by `examples/persistence-size/run.sh` (size probes run on QEMU's mps2-an386):
//!
//! | what | flash (.text + .rodata) |
//! |---|---|
//! | store: settings and calibration save/load (refit, verify, staleness), log append and read | +22.0 KB over a baseline with the flash driver and a calibration fit; named symbols: `sequential-storage` 9.5 KB, `lumisorb::persistence` 4.0 KB; the rest (about 8.5 KB) is store code inlined into the caller and the refit's share of the calibration engine |
//! | CSV export of the log | +14.8 KB more, nearly all `core::fmt` float formatting |
//! | recorded-session export | +27.4 KB more (the session writer checks every line with the session reader) |
//!
//! RAM: a [`FlashStore`] is the driver plus two ranges plus [`SCRATCH_LEN`] (320) bytes of
//! scratch, 340 bytes with a reference to a driver; no caches, no statics. Stack: 4.4 KB at
//! the deepest point of the store operations (most of it the calibration refit: the fit
//! engine and a 16-point `Calibration` on the stack).

mod blocking;
mod calibration_record;
mod codec;
mod method_record;
mod mock_flash;
pub mod record;
mod result_log;
mod session_export;
mod staleness;
mod store;

pub use blocking::{block_on, BlockingFlash};
pub use calibration_record::{
    CalibrationRecord, MAX_STANDARDS, REFIT_TOLERANCE_F32, REFIT_TOLERANCE_F64,
};
pub use method_record::{MethodId, MethodSettings};
pub use mock_flash::{MockFlash, MockFlashError};
pub use record::{DecodeError, EncodeError, RecordKind, FRAME_OVERHEAD};
pub use result_log::{
    export_csv, for_each_entry, write_csv_header, write_csv_row, ConcentrationInterval,
    ExportError, ExportSummary, ResultEntry, SampleId, SampleIdError, CSV_HEADER,
};
pub use session_export::{
    export_session, write_result_comment, SessionExportError, RESULT_COMMENT, RESULT_FLAGS_COMMENT,
};
pub use staleness::Staleness;
pub use store::{
    Encode, FlashStore, LayoutError, LoadError, RecordKey, RecordMap, RecordRing, StoreError,
    StoreLayout, KEY_LEN, MAX_RECORD_LEN, SCRATCH_LEN,
};
