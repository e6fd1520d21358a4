//! Reads captures block by block through `capture::open_blocks` and prints how long it took,
//! the samples per channel and the bytes per second: a timing of the readers alone.
//!
//! `cargo run --release --example read_blocks -- FILE...`

use std::path::Path;
use std::time::Instant;

use kickscan::capture::{open_blocks, Block, ReadOptions};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    for arg in std::env::args().skip(1) {
        let path = Path::new(&arg);
        let bytes = std::fs::metadata(path)?.len();
        let start = Instant::now();
        let mut reader = open_blocks(path, &ReadOptions::default())?;
        let mut block = Block::default();
        let mut checksum = 0.0;
        while reader.next_block_into(&mut block)? {
            // The ends of each block: enough to use what was read without timing a sum.
            for c in &block.channels {
                checksum += c.first().copied().unwrap_or(0.0) + c.last().copied().unwrap_or(0.0);
            }
        }
        let n = reader.samples_read();
        let cap = reader.finish();
        let s = start.elapsed().as_secs_f64();
        println!(
            "{arg}: {n} samples x {} channel(s) in {s:.3} s, {:.0} MB/s (sum {checksum:.6e})",
            cap.channels.len(),
            bytes as f64 / s / 1e6
        );
    }
    Ok(())
}
