//! Instruction-count benchmark of one raw read accumulation (the per-read hot path).
//!
//! `budgets/accumulate.sh` runs this under callgrind with 1 000 and 61 000 reads (below 65 536, the fast path), with
//! and without the accumulator (argument `baseline`: the same loop making the same reads), and
//! divides the difference by 60 000: instructions per accumulated read, repeatable on a busy
//! machine. The reads are a simulated ripple (invented data).

use std::hint::black_box;

use lumisorb::{FullScale, ReadAccumulator};

fn main() {
    let n: u32 = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(100_000);
    let Ok(fs) = FullScale::from_bits(24) else {
        return;
    };
    if std::env::args().nth(2).as_deref() == Some("baseline") {
        let mut sink = 0u32;
        for k in 0..n {
            let read = black_box(8_000_000 + (k.wrapping_mul(2_654_435_761) >> 22));
            sink = black_box(sink ^ read);
        }
        println!("baseline {sink}");
        return;
    }
    let mut acc = ReadAccumulator::new(fs);
    for k in 0..n {
        let read = black_box(8_000_000 + (k.wrapping_mul(2_654_435_761) >> 22));
        if acc.push(read).is_err() {
            break;
        }
    }
    if let Ok(stats) = acc.stats() {
        println!(
            "{} reads, mean {:.3}, sd {:.3}",
            stats.count,
            stats.mean,
            stats.std_dev()
        );
    }
}
