//! Times opening a vector cache, which verifies the checksum of its header and of every
//! section before any row is read: builds an IR correlation cache of COUNT rows (default
//! 100,000) on the default IR grid in a temporary folder, then opens it several times.
//!
//! ```text
//! cargo run --release --example cache_open -- [COUNT]
//! ```
//! Prints one JSON line: rows, file size, and the milliseconds of each open.

use std::time::Instant;

use whorl::cache::{Builder, Kind, Snapshot, VectorCache, VectorRow};
use whorl::library::Status;
use whorl::score::CompositeParams;
use whorl::technique::Technique;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let rows: usize = std::env::args()
        .nth(1)
        .map(|a| a.parse())
        .transpose()?
        .unwrap_or(100_000);
    let dir = tempfile::tempdir()?;
    let technique = Technique::Ir;
    let grid = technique.default_grid();
    let vector = |i: usize| -> Vec<f32> {
        (0..grid.len())
            .map(|k| ((k * (i % 97 + 1)) as f32 * 0.01).sin().abs())
            .collect()
    };
    let sample: Vec<Vec<f32>> = (0..100).map(vector).collect();
    let mut b = Builder::new(
        technique,
        Kind::Centred,
        &grid,
        &CompositeParams::default(),
        (rows, 0),
        &sample,
        Some(dir.path()),
    )?;
    let t0 = Instant::now();
    for i in 0..rows {
        b.push(VectorRow {
            spectrum_id: i as i64 + 1,
            status: Status::Verified,
            vector: vector(i),
            peaks: Vec::new(),
            coverage: None,
        })?;
    }
    let snapshot = Snapshot {
        state_hash: "0".repeat(64),
        generation: 1,
        sum: [0; 32],
        last_id: 0,
    };
    let built = b.finish(&snapshot)?;
    let build_s = t0.elapsed().as_secs_f64();
    let path = built.path.clone().expect("a file");
    let bytes = built.bytes();
    drop(built);
    let mut opens = Vec::new();
    for _ in 0..5 {
        let t0 = Instant::now();
        let c = VectorCache::open(&path, technique, Kind::Centred)?;
        opens.push(t0.elapsed().as_secs_f64() * 1e3);
        assert_eq!(c.rows(), rows);
    }
    println!(
        "{{\"rows\": {rows}, \"bytes\": {bytes}, \"build_s\": {build_s:.1}, \"open_ms\": {opens:.1?}, \"threads\": {}}}",
        rayon::current_num_threads()
    );
    Ok(())
}
