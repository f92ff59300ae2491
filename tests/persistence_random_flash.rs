//! Whatever the flash holds at start-up (never erased, left by other firmware, damaged), the
//! store answers with a typed error or a clean (possibly empty) store, never a panic; and after
//! `erase_all` it always works.

use core::ops::ControlFlow;

use lumisorb::persistence::{
    for_each_entry, CalibrationRecord, FlashStore, MethodId, MethodSettings, MockFlash,
    ResultEntry, SampleId, StoreLayout,
};
use lumisorb::{Absorbance, Flags};

const SIZE: usize = 6144;
type Flash = MockFlash<SIZE, 1024, 4>;

const LAYOUT: StoreLayout = StoreLayout {
    map: 0..4096,
    log: 4096..6144,
};

/// xorshift64* (Vigna 2016), a small deterministic generator so every run checks the same images.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
    fn fill(&mut self, bytes: &mut [u8]) {
        for b in bytes {
            *b = self.next() as u8;
        }
    }
}

fn settings(channel: u8) -> MethodSettings {
    MethodSettings {
        channel,
        method: MethodId { id: 1, version: 1 },
        wavelength_nm: 450,
        path_length_mm: 10.0,
        lit_reads: 4,
        dark_reads: 4,
        stray_fraction: 0.0,
        use_reference: false,
        dilution_factor: 1.0,
        max_calibration_age_s: 0,
    }
}

fn entry(i: u32) -> ResultEntry {
    ResultEntry {
        time_s: i,
        sample: SampleId::new("X9").unwrap(),
        channel: 0,
        method: MethodId { id: 1, version: 1 },
        absorbance: Absorbance::new(0.5).unwrap(),
        absorbance_sd: 0.01,
        concentration: None,
        flags: Flags::NONE,
    }
}

/// A flash image of a store in normal use.
fn healthy_image() -> [u8; SIZE] {
    let mut store = FlashStore::new(Flash::new(), LAYOUT).unwrap();
    for round in 0..5u16 {
        for ch in 0..3u8 {
            let mut s = settings(ch);
            s.method.version = round;
            s.save(&mut store).unwrap();
        }
    }
    for i in 0..40 {
        entry(i).append(&mut store).unwrap();
    }
    *store.into_flash().bytes()
}

#[derive(Default, Debug)]
struct Tally {
    loads_ok: u32,
    loads_err: u32,
    exports_ok: u32,
    exports_err: u32,
    saves_ok: u32,
    saves_err: u32,
}

fn exercise(image: [u8; SIZE], tally: &mut Tally) {
    let mut store = FlashStore::new(Flash::from_bytes(image), LAYOUT).unwrap();
    for ch in 0..4u8 {
        // Any Some is a fully validated record (decode checks CRC, version and every field).
        match MethodSettings::load(&mut store, ch) {
            Ok(_) => tally.loads_ok += 1,
            Err(_) => tally.loads_err += 1,
        }
        match CalibrationRecord::load(&mut store, ch) {
            Ok(_) => tally.loads_ok += 1,
            Err(_) => tally.loads_err += 1,
        }
    }
    match for_each_entry(&mut store, |_| ControlFlow::Continue(())) {
        Ok(_) => tally.exports_ok += 1,
        Err(_) => tally.exports_err += 1,
    }
    let saved = settings(2).save(&mut store).is_ok() && entry(99).append(&mut store).is_ok();
    if saved {
        tally.saves_ok += 1;
        // A store that accepted the save returns it.
        assert_eq!(MethodSettings::load(&mut store, 2), Ok(Some(settings(2))));
    } else {
        tally.saves_err += 1;
    }
    // The way out of any state: erase, and everything works.
    store.erase_all().unwrap();
    assert_eq!(MethodSettings::load(&mut store, 2), Ok(None));
    settings(2).save(&mut store).unwrap();
    entry(1).append(&mut store).unwrap();
    assert_eq!(MethodSettings::load(&mut store, 2), Ok(Some(settings(2))));
}

#[test]
fn random_images_never_panic() {
    let mut rng = Rng(0x9E37_79B9_7F4A_7C15);
    let mut tally = Tally::default();
    let healthy = healthy_image();
    // LUMISORB_RANDOM_IMAGES=N runs more images (600 by default, for CI).
    let images: usize = std::env::var("LUMISORB_RANDOM_IMAGES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(600);
    for case in 0..images {
        let mut image = [0xFFu8; SIZE];
        match case % 6 {
            // Uniform noise.
            0 => rng.fill(&mut image),
            // All programmed.
            1 => image = [0; SIZE],
            // Noise with every page marked closed or open, to lure the parser into the items.
            2 => {
                rng.fill(&mut image);
                for page in image.chunks_mut(1024) {
                    let marked = rng.below(2) == 0;
                    page[..4].fill(if marked { 0 } else { 0xFF });
                    page[1020..].fill(if rng.below(2) == 0 { 0 } else { 0xFF });
                }
            }
            // A healthy store with bytes overwritten by noise.
            3 => {
                image = healthy;
                for _ in 0..1 + rng.below(8) {
                    let at = rng.below(SIZE);
                    image[at] = rng.next() as u8;
                }
            }
            // A healthy store with single bit flips.
            4 => {
                image = healthy;
                for _ in 0..1 + rng.below(4) {
                    image[rng.below(SIZE)] ^= 1 << rng.below(8);
                }
            }
            // A healthy store with a run of noise (a stray write by other firmware).
            _ => {
                image = healthy;
                let at = rng.below(SIZE - 64);
                let len = 1 + rng.below(64);
                rng.fill(&mut image[at..at + len]);
            }
        }
        exercise(image, &mut tally);
    }
    println!("{images} images: {tally:?}");
    assert!(tally.loads_ok > 0 && tally.saves_ok > 0);
}

#[test]
fn a_flipped_bit_in_the_newest_record_falls_back_to_an_intact_one() {
    let mut store = FlashStore::new(Flash::new(), LAYOUT).unwrap();
    let mut old = settings(0);
    old.method.version = 1;
    old.save(&mut store).unwrap();
    let new = settings(0);
    new.save(&mut store).unwrap();
    let mut flash = store.into_flash();
    // Find the newest copy (the last occurrence of its encoding) and flip one bit in it.
    let mut buf = [0u8; MethodSettings::ENCODED_LEN];
    new.encode(&mut buf).unwrap();
    let at = flash
        .bytes()
        .windows(buf.len())
        .rposition(|w| w == buf)
        .unwrap();
    flash.bytes_mut()[at + 12] ^= 0x04;
    let mut store = FlashStore::new(flash, LAYOUT).unwrap();
    // Never the damaged record: the library's item CRC skips it and the previous one is used.
    assert_eq!(MethodSettings::load(&mut store, 0), Ok(Some(old)));
}
