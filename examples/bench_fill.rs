//! Fills a library with synthetic spectra for `scripts/bench`, through the ordinary staging
//! (preparation in parallel) and `Library::store` (500 per transaction) path, and writes
//! unknowns (measured-again copies of library spectra) as CSV files.
//!
//! ```text
//! cargo run --release --example bench_fill -- LIBRARY ir|ms-ei COUNT UNKNOWNS_DIR N_UNKNOWNS [SEED]
//! cargo run --release --example bench_fill -- --csv DIR ir COUNT      # CSV files + manifest
//! ```
//! Prints one JSON line: spectra stored and seconds taken.

use std::io::Write;
use std::path::PathBuf;

use rayon::prelude::*;
use whorl::library::Library;
use whorl::library::synthetic::{Rng, ir_points, ms_points, perturb, staged};
use whorl::technique::Technique;

fn points(t: Technique, rng: &mut Rng) -> Vec<(f64, f64)> {
    match t {
        Technique::MsEi => ms_points(rng),
        _ => ir_points(rng),
    }
}

fn write_csv(path: &std::path::Path, t: Technique, pts: &[(f64, f64)]) -> std::io::Result<()> {
    let mut f = std::io::BufWriter::new(std::fs::File::create(path)?);
    let header = if t == Technique::MsEi {
        "mz,abundance"
    } else {
        "wavenumber,absorbance"
    };
    writeln!(f, "{header}")?;
    for (x, y) in pts {
        writeln!(f, "{x},{y}")?;
    }
    Ok(())
}

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    if args.first().map(String::as_str) == Some("--csv") {
        let dir = PathBuf::from(&args[1]);
        let t: Technique = args[2].parse()?;
        let n: usize = args[3].parse()?;
        std::fs::create_dir_all(&dir)?;
        let mut rng = Rng::new(77);
        let mut manifest = String::from("file,technique,name\n");
        for i in 0..n {
            let name = format!("s{i:07}.csv");
            write_csv(&dir.join(&name), t, &points(t, &mut rng))?;
            manifest.push_str(&format!("{name},{t},synthetic {i}\n"));
        }
        std::fs::write(dir.join("manifest.csv"), manifest)?;
        return Ok(());
    }
    let root = PathBuf::from(&args[0]);
    let t: Technique = args[1].parse()?;
    let n: usize = args[2].parse()?;
    let unknowns = PathBuf::from(&args[3]);
    let n_unknowns: usize = args[4].parse()?;
    let seed: u64 = args.get(5).map_or(Ok(1), |s| s.parse())?;
    let mut lib = if root.join("library.sqlite").exists() {
        Library::open(&root)?
    } else {
        Library::init(&root, "bench")?
    };
    std::fs::create_dir_all(&unknowns)?;
    let mut rng = Rng::new(seed);
    let start = std::time::Instant::now();
    let mut stored = 0;
    let mut sources = Vec::new();
    for b0 in (0..n).step_by(whorl::library::BATCH) {
        let b1 = (b0 + whorl::library::BATCH).min(n);
        let seeds: Vec<u64> = (b0..b1).map(|_| rng.next_u64()).collect();
        let recipes = lib.recipes().clone();
        let batch: Vec<_> = seeds
            .par_iter()
            .enumerate()
            .map(|(k, &s)| {
                let pts = points(t, &mut Rng::new(s));
                staged(&recipes, t, pts, &format!("{t} {}", b0 + k), &[])
            })
            .collect::<whorl::Result<_>>()?;
        for o in lib.store(&batch, "bench", false)? {
            o?;
            stored += 1;
        }
        if sources.len() < n_unknowns {
            sources.extend(seeds.iter().take(n_unknowns - sources.len()).copied());
        }
    }
    let seconds = start.elapsed().as_secs_f64();
    for (i, &s) in sources.iter().enumerate() {
        let pts = perturb(&points(t, &mut Rng::new(s)), &mut rng, 0.05);
        write_csv(&unknowns.join(format!("u{i:04}.csv")), t, &pts)?;
    }
    println!("{{\"spectra\": {stored}, \"seconds\": {seconds:.3}}}");
    Ok(())
}
