//! Replay throughput: generates a large session (not committed; written to a temporary
//! directory), then reads and replays it in memory and prints raw reads per second.
//!
//! `cargo run --release --example replay_bench -- [READS]` (default 10 000 000 reads; about
//! 45 bytes a row, so about 450 MB of temporary file).
//! The timing covers the whole device path of the replay: line splitting, UTF-8 check, parsing
//! and validation of every field, grouping, dark/lit accumulation with the robust buffers and
//! drift check, photometry, calibration and quantification. File reading is outside the timing.

use std::time::Instant;

use lumisorb::session::{replay_bytes, Led, Metadata, Replay, Role, Row, SessionWriter};

type BenchReplay = Replay<4, 64, 16_384>;

/// xorshift64 for read noise (deterministic).
struct Rng(u64);

impl Rng {
    fn noise(&mut self, amplitude: u32) -> u32 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 % u64::from(2 * amplitude + 1)) as u32
    }
}

fn generate(reads: u64) -> String {
    let mut meta = Metadata::new(65_535);
    meta.unit = Some(heapless::String::try_from("mg/L").unwrap());
    let mut text = String::with_capacity(reads as usize * 48);
    let mut w = SessionWriter::new(&mut text, &meta).unwrap();
    let mut rng = Rng(0x1234_5678);
    let per_measurement: u64 = 1_000;
    let measurements = (reads / per_measurement).max(1);
    let mut t: u32 = 0;
    let mut ids = Vec::new();
    for k in 0..measurements {
        // Every 10th measurement a blank; five standards in the first ten, samples after.
        let (role, conc, level) = match k % 10 {
            0 => (Role::Blank, None, 50_000u32),
            1..=5 if k < 10 => {
                let c = (k % 10) as f64 * 0.2;
                (
                    Role::Standard,
                    Some(c),
                    (50_000.0 * 10f64.powf(-0.5 * c)) as u32,
                )
            }
            _ => (Role::Sample, None, 30_000),
        };
        ids.push(format!("m{k}"));
        let id = ids.last().unwrap();
        for i in 0..per_measurement {
            t = t.wrapping_add(2);
            let led = if i % 2 == 0 { Led::Off } else { Led::On };
            let (base, reference) = if led == Led::On {
                (level, 40_000)
            } else {
                (800, 600)
            };
            let row = Row {
                t_ms: t,
                channel: "ch1",
                nm: Some(630),
                led,
                role,
                id,
                conc,
                signal: base - 20 + rng.noise(20),
                reference: Some(reference - 20 + rng.noise(20)),
            };
            w.row(&row).unwrap();
        }
    }
    text
}

fn main() {
    let reads: u64 = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(10_000_000);
    let dir = std::env::temp_dir().join(format!("lumisorb-replay-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("large-session.csv");
    std::fs::write(&path, generate(reads)).unwrap();
    let bytes = std::fs::read(&path).unwrap();
    println!(
        "generated {} ({:.0} MB, {reads} reads)",
        path.display(),
        bytes.len() as f64 / 1e6
    );
    let mut best = f64::INFINITY;
    let mut replayed = 0;
    for _ in 0..3 {
        let mut replay: Box<BenchReplay> = Box::new(Replay::new());
        let start = Instant::now();
        replay_bytes(&bytes, &mut replay).unwrap();
        best = best.min(start.elapsed().as_secs_f64());
        replayed = replay.reads();
    }
    let _ = std::fs::remove_dir_all(&dir);
    println!(
        "replayed {replayed} raw reads in {best:.3} s (best of 3, one core): {:.2} million reads/s, {:.0} MB/s",
        replayed as f64 / best / 1e6,
        bytes.len() as f64 / best / 1e6
    );
}
