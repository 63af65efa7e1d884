//! Times the phases of a search inside one process, for `scripts/bench`.
//!
//! ```text
//! cargo run --release --example bench_query -- LIBRARY ir|ms-ei UNKNOWNS_DIR REPEATS [--exact] [--forward]
//! ```
//! Prints one JSON object of medians in milliseconds: open, state hash, cache (map or
//! build), prepare, search (warm, one unknown), rank (scan and rescoring without the hit
//! list's metadata), batch (all unknowns together), and with `--exact` the exact search; and
//! the stage breakdown (`whorl::search::Trace`) of the median single rank and of the batch.

use std::path::PathBuf;
use std::time::Instant;

use whorl::library::{Library, Status, read_and_prepare};
use whorl::search::{Request, search, search_exact, search_many};
use whorl::technique::Technique;

fn ms(t: Instant) -> f64 {
    t.elapsed().as_secs_f64() * 1e3
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let root = PathBuf::from(&args[0]);
    let t: Technique = args[1].parse()?;
    let dir = PathBuf::from(&args[2]);
    let repeats: usize = args[3].parse()?;
    let exact = args.iter().any(|a| a == "--exact");
    // EI-MS: forward search instead of the default reverse search.
    let forward = args.iter().any(|a| a == "--forward");

    let t0 = Instant::now();
    let lib = Library::open(&root)?;
    let open = ms(t0);
    let t0 = Instant::now();
    lib.state_hash()?;
    let state_hash = ms(t0);
    let kind = whorl::cache::kind_for(t, whorl::score::Measure::default_for(t)).expect("kind");
    let t0 = Instant::now();
    // A rebuild renames a new file into place: a changed inode tells it from a reuse.
    let file = root
        .join(whorl::cache::CACHE_DIR)
        .join(whorl::cache::file_name(t, kind));
    let inode = || {
        use std::os::unix::fs::MetadataExt;
        std::fs::metadata(&file).map(|m| m.ino()).ok()
    };
    let before = inode();
    let cache = lib.vector_cache(t, kind)?;
    let origin = if inode() == before {
        "Fresh"
    } else {
        "Rebuilt"
    };
    let cache_ms = ms(t0);

    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)?
        .map(|e| e.map(|e| e.path()))
        .collect::<Result<_, _>>()?;
    files.sort();
    let recipe = lib.recipe(t)?.clone();
    let t0 = Instant::now();
    let unknowns: Vec<_> = files
        .iter()
        .map(|f| read_and_prepare(f, &recipe, None, None, None).map(|(_, p)| p))
        .collect::<whorl::Result<_>>()?;
    let prepare = ms(t0) / files.len() as f64;

    let mut request = Request::new(t);
    request.statuses.push(Status::Pending);
    request.params.composite.reverse &= !forward;
    let mut warm = Vec::new();
    let mut rank = Vec::new();
    let mut top = Vec::new();
    let mut traces = Vec::new();
    for i in 0..repeats {
        let u = &unknowns[i % unknowns.len()];
        let t0 = Instant::now();
        let hits = search(&lib, u, &request)?;
        warm.push(ms(t0));
        top.push(hits.hits.first().map(|h| h.spectrum_id).unwrap_or(0));
        let t0 = Instant::now();
        let mut trace = whorl::search::Trace::default();
        whorl::search::rank_traced(&lib, std::slice::from_ref(u), &request, &mut trace)?;
        rank.push(ms(t0));
        traces.push(trace);
    }
    // The stage breakdown of the median single-unknown rank.
    let mut order: Vec<usize> = (0..rank.len()).collect();
    order.sort_by(|&a, &b| rank[a].total_cmp(&rank[b]));
    let stages = traces[order[order.len() / 2]].clone();
    let t0 = Instant::now();
    let mut batch_trace = whorl::search::Trace::default();
    whorl::search::rank_traced(&lib, &unknowns, &request, &mut batch_trace)?;
    let batch_rank = ms(t0);
    let t0 = Instant::now();
    let lists = search_many(&lib, &unknowns, &request)?;
    let batch = ms(t0);
    let mut exact_ms = None;
    let mut same = None;
    if exact {
        let t0 = Instant::now();
        let e = search_exact(&lib, &unknowns[0], &request)?;
        exact_ms = Some(ms(t0));
        let ids =
            |l: &whorl::search::HitList| l.hits.iter().map(|h| h.spectrum_id).collect::<Vec<_>>();
        same = Some(ids(&e) == ids(&lists[0]));
    }
    let json = serde_json::json!({
        "rows": cache.rows(),
        "cache_bytes": cache.bytes(),
        "i8_bytes": cache.rows() * cache.stride(),
        "coarse_bytes": cache.rows() * cache.coarse_stride(),
        "stride": cache.stride(),
        "cache_origin": origin,
        "open_ms": open,
        "state_hash_ms": state_hash,
        "cache_ms": cache_ms,
        "prepare_ms": prepare,
        "search_ms": median(warm),
        "rank_ms": median(rank),
        "batch_ms": batch,
        "stages": stages,
        "batch_rank_ms": batch_rank,
        "batch_stages": batch_trace,
        "batch_unknowns": unknowns.len(),
        "exact_ms": exact_ms,
        "exact_top10_same": same,
        "top_hits": top,
    });
    println!("{json}");
    Ok(())
}
