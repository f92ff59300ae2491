//! What every probe shares: the flash driver (the crate's mock NOR flash in .bss, 2 KiB pages
//! and 8-byte words like many Cortex-M4 parts), a calibration fit on inputs the optimiser
//! cannot see, and the data the store probes save.
#![allow(dead_code)]

use core::hint::black_box;
use core::panic::PanicInfo;

use cortex_m_semihosting::debug;

use lumisorb::calibration::{Calibration, CalibrationSet, Model, Standard, Weighting};
use lumisorb::persistence::{
    CalibrationRecord, ConcentrationInterval, MethodId, MethodSettings, MockFlash, ResultEntry,
    SampleId,
};
use lumisorb::{Absorbance, Flags};

pub type Flash = MockFlash<16384, 2048, 8>;

/// The flash, once, in .bss (not on the stack).
pub fn flash() -> &'static mut Flash {
    cortex_m::singleton!(: Flash = Flash::new()).expect("called once")
}

/// A linear calibration on 6 standards whose values come through `black_box`.
pub fn calibration() -> Option<Calibration> {
    let mut set = CalibrationSet::new();
    for i in 0..6u16 {
        let c = black_box(f32::from(i) * 0.5);
        let a = Absorbance::new(black_box(0.01 + 0.2 * c)).ok()?;
        set.push(Standard::with_replicates(c, a, 0.002, 3).ok()?)
            .ok()?;
    }
    Calibration::fit(&set, Model::Linear, Weighting::None).ok()
}

pub fn record(calibration: Calibration) -> CalibrationRecord {
    CalibrationRecord {
        channel: black_box(0),
        method: MethodId { id: 1, version: 1 },
        path_length_mm: 10.0,
        created_s: black_box(1_000),
        sequence: 1,
        calibration,
    }
}

pub fn settings() -> MethodSettings {
    MethodSettings {
        channel: black_box(0),
        method: MethodId { id: 1, version: 1 },
        wavelength_nm: 630,
        path_length_mm: 10.0,
        lit_reads: 16,
        dark_reads: 8,
        stray_fraction: 0.0,
        use_reference: false,
        dilution_factor: 1.0,
        max_calibration_age_s: 86_400,
    }
}

pub fn entry(i: u32) -> Option<ResultEntry> {
    Some(ResultEntry {
        time_s: black_box(i),
        sample: SampleId::new(black_box("S1")).ok()?,
        channel: 0,
        method: MethodId { id: 1, version: 1 },
        absorbance: Absorbance::new(black_box(0.3)).ok()?,
        absorbance_sd: 0.001,
        concentration: Some(ConcentrationInterval {
            value: 1.5,
            low: 1.4,
            high: 1.6,
        }),
        flags: Flags::NONE,
    })
}

/// A `fmt::Write` that only counts bytes.
pub struct Count(pub usize);

impl core::fmt::Write for Count {
    fn write_str(&mut self, s: &str) -> core::fmt::Result {
        self.0 += s.len();
        Ok(())
    }
}

pub type Store =
    lumisorb::persistence::FlashStore<lumisorb::persistence::BlockingFlash<&'static mut Flash>>;

/// A store over the flash: map in pages 0-3, log in pages 4-7.
pub fn store() -> Option<Store> {
    use lumisorb::persistence::{BlockingFlash, FlashStore, StoreLayout};
    let layout = StoreLayout {
        map: 0..8192,
        log: 8192..16384,
    };
    FlashStore::new(BlockingFlash(flash()), layout).ok()
}

/// What a firmware does with its store: settings and a calibration saved and loaded (refit and
/// verified, staleness judged), results appended and read back.
pub fn store_ops(store: &mut Store) -> Option<()> {
    settings().save(store).ok()?;
    MethodSettings::load(store, 0).ok()??;
    record(calibration()?).save(store).ok()?;
    let loaded = CalibrationRecord::load(store, 0).ok()??;
    let _ = black_box(lumisorb::persistence::Staleness::of(&loaded, &settings(), 2_000).flags());
    for i in 0..4 {
        entry(i)?.append(store).ok()?;
    }
    let mut sum = 0u32;
    let summary = lumisorb::persistence::for_each_entry(store, |e| {
        sum = sum.wrapping_add(e.time_s);
        core::ops::ControlFlow::Continue(())
    })
    .ok()?;
    (summary.exported == 4 && black_box(sum) == 6).then_some(())
}

/// The CSV export on top (float formatting).
pub fn csv_ops(store: &mut Store) -> Option<()> {
    let summary = lumisorb::persistence::export_csv(store, &mut Count(0)).ok()?;
    (summary.exported == 4).then_some(())
}

/// The session-format export on top.
pub fn session_ops(store: &mut Store) -> Option<()> {
    let meta = lumisorb::session::Metadata::new(black_box(65_535));
    let summary = lumisorb::persistence::export_session(store, Count(0), &meta).ok()?;
    (summary.exported == 4).then_some(())
}

/// Ends the emulated run: exit status 0 when `ok`, 1 otherwise.
pub fn exit(ok: bool) -> ! {
    debug::exit(if ok {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    #[allow(clippy::empty_loop)]
    loop {}
}

#[panic_handler]
fn panic(_: &PanicInfo) -> ! {
    exit(false)
}
