//! The flash store end to end on the mock NOR flash: method settings per channel, the result
//! log ring and its CSV export, layout checks and the capacity rules stated in the docs.

use core::ops::ControlFlow;

use lumisorb::persistence::{
    export_csv, for_each_entry, BlockingFlash, ConcentrationInterval, FlashStore, LayoutError,
    MethodId, MethodSettings, MockFlash, RecordKey, RecordKind, RecordMap, RecordRing, ResultEntry,
    SampleId, StoreError, StoreLayout, CSV_HEADER, KEY_LEN,
};
use lumisorb::{Absorbance, Flag, Flags};

type Flash = MockFlash<8192, 1024, 4>;

fn layout() -> StoreLayout {
    StoreLayout {
        map: 0..4096,
        log: 4096..8192,
    }
}

fn settings(channel: u8, version: u16) -> MethodSettings {
    MethodSettings {
        channel,
        method: MethodId { id: 7, version },
        wavelength_nm: 525,
        path_length_mm: 10.0,
        lit_reads: 16,
        dark_reads: 4,
        stray_fraction: 0.002,
        use_reference: channel.is_multiple_of(2),
        dilution_factor: 2.0,
        max_calibration_age_s: 86_400,
    }
}

fn entry(i: u32) -> ResultEntry {
    ResultEntry {
        time_s: 1_000 + i,
        sample: SampleId::new("POND-3").unwrap(),
        channel: (i % 3) as u8,
        method: MethodId { id: 7, version: 1 },
        absorbance: Absorbance::new(0.1 + i as f32 * 1e-3).unwrap(),
        absorbance_sd: 0.001,
        concentration: if i.is_multiple_of(4) {
            None
        } else {
            Some(ConcentrationInterval {
                value: i as f32,
                low: i as f32 - 0.5,
                high: i as f32 + 0.5,
            })
        },
        flags: if i.is_multiple_of(5) {
            Flags::only(Flag::AboveRange)
        } else {
            Flags::NONE
        },
    }
}

fn logged_times<F: RecordRing>(log: &mut F) -> Vec<u32> {
    let mut times = Vec::new();
    let summary = for_each_entry(log, |e| {
        times.push(e.time_s);
        ControlFlow::Continue(())
    })
    .unwrap();
    assert_eq!(summary.unreadable, 0);
    times
}

#[test]
fn settings_per_channel_survive_many_updates_and_a_restart() {
    let mut store = FlashStore::new(Flash::new(), layout()).unwrap();
    assert_eq!(MethodSettings::load(&mut store, 0), Ok(None));
    // 4 channels rewritten 200 times each: the map cycles its 4 pages many times over.
    for version in 0..200u16 {
        for channel in 0..4u8 {
            settings(channel, version).save(&mut store).unwrap();
        }
    }
    let flash = store.into_flash();
    let mut store = FlashStore::new(flash, layout()).unwrap();
    for channel in 0..4u8 {
        assert_eq!(
            MethodSettings::load(&mut store, channel),
            Ok(Some(settings(channel, 199)))
        );
    }
    assert_eq!(MethodSettings::load(&mut store, 9), Ok(None));
}

#[test]
fn a_record_under_the_wrong_key_is_refused() {
    let mut store = FlashStore::new(Flash::new(), layout()).unwrap();
    let key = RecordKey {
        kind: RecordKind::MethodSettings,
        channel: 5,
    };
    store.store_record(key, &settings(6, 1)).unwrap();
    assert!(MethodSettings::load(&mut store, 5).is_err());
}

#[test]
fn log_keeps_the_newest_entries_in_order_and_exports_csv() {
    let mut store = FlashStore::new(Flash::new(), layout()).unwrap();
    let total = 400u32;
    for i in 0..total {
        entry(i).append(&mut store).unwrap();
    }
    let times = logged_times(&mut store);
    // A contiguous run ending with the newest entry.
    assert_eq!(*times.last().unwrap(), 1_000 + total - 1);
    assert!(times.windows(2).all(|w| w[1] == w[0] + 1));
    // Capacity rule from the module docs: at least (pages - 1) * entries_per_page are kept.
    let per_page = FlashStore::<Flash>::items_per_page(ResultEntry::MAX_ENCODED_LEN);
    assert!(
        times.len() >= 3 * per_page,
        "{} < 3 * {per_page}",
        times.len()
    );
    assert!(times.len() <= 4 * FlashStore::<Flash>::items_per_page(ResultEntry::MIN_ENCODED_LEN));

    let mut csv = String::new();
    let summary = export_csv(&mut store, &mut csv).unwrap();
    assert_eq!(summary.exported as usize, times.len());
    let mut lines = csv.lines();
    assert_eq!(lines.next(), Some(CSV_HEADER));
    assert_eq!(lines.count(), times.len());
    assert!(csv.ends_with(&format!(
        "{},POND-3,0,7,1,0.499,0.001,399,398.5,399.5,\n",
        1_000 + total - 1
    )));

    store.clear_records().unwrap();
    assert!(logged_times(&mut store).is_empty());
}

#[test]
fn blocking_hal_flash_through_the_adapter() {
    // A blocking embedded-storage driver (the mock used through its blocking traits) wrapped
    // for the async library.
    let mut store = FlashStore::new(BlockingFlash(Flash::new()), layout()).unwrap();
    settings(1, 3).save(&mut store).unwrap();
    entry(1).append(&mut store).unwrap();
    assert_eq!(
        MethodSettings::load(&mut store, 1),
        Ok(Some(settings(1, 3)))
    );
    assert_eq!(logged_times(&mut store), vec![1_001]);
}

#[test]
fn layouts_are_checked() {
    let bad = |map: core::ops::Range<u32>, log: core::ops::Range<u32>| {
        FlashStore::new(Flash::new(), StoreLayout { map, log }).err()
    };
    assert_eq!(bad(0..1024, 4096..8192), Some(LayoutError::MapRange));
    assert_eq!(bad(0..4000, 4096..8192), Some(LayoutError::MapRange));
    assert_eq!(bad(0..4096, 4096..4096), Some(LayoutError::LogRange));
    assert_eq!(bad(0..4096, 3072..5120), Some(LayoutError::Overlap));
    assert_eq!(bad(0..4096, 4096..9216), Some(LayoutError::OutsideFlash));
    // 256-byte pages cannot hold a calibration with 16 standards.
    let small = FlashStore::new(
        MockFlash::<4096, 256, 4>::new(),
        StoreLayout {
            map: 0..2048,
            log: 2048..4096,
        },
    );
    assert_eq!(small.err(), Some(LayoutError::PagesTooSmall));
}

#[test]
fn map_full_is_a_typed_error() {
    // Two 1 KiB pages: one is always kept open, so the live records must fit in one page.
    let mut store = FlashStore::new(
        MockFlash::<3072, 1024, 4>::new(),
        StoreLayout {
            map: 0..2048,
            log: 2048..3072,
        },
    )
    .unwrap();
    let per_page = FlashStore::<Flash>::items_per_page(KEY_LEN + MethodSettings::ENCODED_LEN);
    let mut result = Ok(());
    for channel in 0..=per_page as u8 {
        result = settings(channel, 1).save(&mut store);
        if result.is_err() {
            break;
        }
    }
    assert_eq!(result, Err(StoreError::Full));
    // What was stored before stays readable.
    assert_eq!(
        MethodSettings::load(&mut store, 0),
        Ok(Some(settings(0, 1)))
    );
}

/// The capacity table of the persistence module docs, computed and checked by experiment.
#[test]
fn capacity_table_of_the_docs() {
    use lumisorb::calibration::{Calibration, CalibrationSet, Model, Standard, Weighting};
    use lumisorb::persistence::{CalibrationRecord, FRAME_OVERHEAD};
    let cal6 = FRAME_OVERHEAD + 69 + 14 * 6;
    let cal16 = CalibrationRecord::MAX_ENCODED_LEN;
    let set = KEY_LEN + MethodSettings::ENCODED_LEN;
    let (rmin, rmax) = (ResultEntry::MIN_ENCODED_LEN, ResultEntry::MAX_ENCODED_LEN);
    assert_eq!(
        (cal6, cal16, set - KEY_LEN, rmin, rmax),
        (163, 309, 38, 32, 59)
    );
    fn row<F: embedded_storage_async::nor_flash::NorFlash>(sizes: [usize; 5]) -> [usize; 5] {
        sizes.map(FlashStore::<F>::items_per_page)
    }
    let sizes = [KEY_LEN + cal6, KEY_LEN + cal16, set, rmin, rmax];
    assert_eq!(row::<MockFlash<2048, 1024, 4>>(sizes), [5, 3, 21, 25, 14]);
    assert_eq!(row::<MockFlash<4096, 2048, 8>>(sizes), [11, 6, 42, 50, 28]);
    assert_eq!(
        row::<MockFlash<8192, 4096, 4>>(sizes),
        [23, 12, 85, 102, 60]
    );

    // Experiment: a 4-page map of 1 KiB holds (4 - 1) * 3 - 1 = 8 calibrations of 16
    // standards, rewritten over and over; a 9th channel does not fit (an update needs one free
    // slot besides the live records).
    let mut standards = CalibrationSet::new();
    for i in 0..16u16 {
        let c = f32::from(i);
        standards
            .push(Standard::with_replicates(c, Absorbance::new(0.1 * c).unwrap(), 0.01, 2).unwrap())
            .unwrap();
    }
    let calibration = Calibration::fit(&standards, Model::Linear, Weighting::None).unwrap();
    let record = |channel: u8, sequence: u32| CalibrationRecord {
        channel,
        method: MethodId { id: 1, version: 1 },
        path_length_mm: 10.0,
        created_s: sequence,
        sequence,
        calibration: calibration.clone(),
    };
    let mut store = FlashStore::new(Flash::new(), layout()).unwrap();
    for round in 0..20 {
        for channel in 0..8 {
            record(channel, round).save(&mut store).unwrap();
        }
    }
    let mut result = Ok(());
    for round in 0..20 {
        for channel in 0..9 {
            result = result.and(record(channel, round).save(&mut store));
        }
    }
    assert_eq!(result, Err(StoreError::Full));
}
