//! A bounded load client for `whorl serve`, for `scripts/bench --server`: a fixed pool of
//! worker threads, each with its own keep-alive connection (one `ureq` agent per worker),
//! sending searches and submissions for a fixed time.
//!
//! ```text
//! cargo run --release --example bench_server -- URL TOKEN UNKNOWNS_DIR CLIENTS SECONDS SUBMIT_SHARE [SEED]
//! cargo run --release --example bench_server -- --in-process LIBRARY UNKNOWNS_DIR REPEATS
//! ```
//! With `--in-process` it times instead, in this process, the search the API's search route
//! makes of each unknown (`whorl::search::search_file` under the request `whorl.toml` and the
//! form resolve to, pending spectra included, the report turned into JSON) on a library
//! opened once and warmed, and prints the median and p99 in milliseconds: what the route
//! adds is the difference.
//!
//! Each request is a search (`POST /api/v1/search`, an unknown from UNKNOWNS_DIR in turn) or,
//! with probability SUBMIT_SHARE (0 to 1), a submission (`POST /api/v1/spectra`) of a seeded
//! synthetic IR spectrum no other request sends, named `load W-K` (worker W, its K-th).
//! Prints one JSON object: the requests and errors of each kind, the p50 and p99 latency in
//! milliseconds, the rate, the first errors in full, and every acknowledged (2xx) submission
//! with its name and the spectrum id the server answered, for the caller to check against the
//! library afterwards. A worker never sends a new request before its last one was answered,
//! so at most CLIENTS requests are in flight. Nothing here asserts a time.

use std::io::Write as _;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use serde_json::{Value, json};
use whorl::library::synthetic::{Rng, ir_points};

/// One request as sent and answered.
struct Done {
    submit: bool,
    ms: f64,
    error: Option<String>,
    /// A submission's name and the id it got, when acknowledged.
    ack: Option<(String, i64)>,
}

fn part(body: &mut Vec<u8>, boundary: &str, name: &str, file: Option<&str>, bytes: &[u8]) {
    match file {
        Some(f) => write!(
            body,
            "--{boundary}\r\nContent-Disposition: form-data; name=\"{name}\"; filename=\"{f}\"\r\nContent-Type: text/csv\r\n\r\n"
        ),
        None => write!(
            body,
            "--{boundary}\r\nContent-Disposition: form-data; name=\"{name}\"\r\n\r\n"
        ),
    }
    .expect("writing to a Vec");
    body.extend_from_slice(bytes);
    body.extend_from_slice(b"\r\n");
}

/// A multipart/form-data body (RFC 7578) of text fields and one file part.
fn form(fields: &[(&str, &str)], file_name: &str, file: &[u8]) -> (String, Vec<u8>) {
    let boundary = "whorl-bench-boundary-3d81";
    let mut body = Vec::new();
    for (k, v) in fields {
        part(&mut body, boundary, k, None, v.as_bytes());
    }
    part(&mut body, boundary, "file", Some(file_name), file);
    write!(body, "--{boundary}--\r\n").expect("writing to a Vec");
    (format!("multipart/form-data; boundary={boundary}"), body)
}

fn csv(points: &[(f64, f64)]) -> Vec<u8> {
    let mut s = String::from("wavenumber,absorbance\n");
    for (x, y) in points {
        s.push_str(&format!("{x},{y}\n"));
    }
    s.into_bytes()
}

fn percentile(sorted: &[f64], p: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    // Nearest rank (common practice): the smallest value with at least p of them at or below.
    let rank = ((p * sorted.len() as f64).ceil() as usize).clamp(1, sorted.len());
    Some(sorted[rank - 1])
}

#[allow(clippy::too_many_arguments)]
fn worker(
    w: usize,
    url: &str,
    token: &str,
    unknowns: &[(String, Vec<u8>)],
    deadline: Instant,
    share: f64,
    seed: u64,
) -> Vec<Done> {
    // One agent per worker, holding at most one idle connection: the worker's own keep-alive
    // connection, reused from one request to the next.
    let agent: ureq::Agent = ureq::Agent::config_builder()
        .http_status_as_error(false)
        .max_idle_connections(1)
        .max_idle_connections_per_host(1)
        .timeout_global(Some(Duration::from_secs(300)))
        .build()
        .into();
    let auth = format!("Bearer {token}");
    let mut rng = Rng::new(seed ^ (w as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15));
    let mut done = Vec::new();
    let mut k = 0usize;
    while Instant::now() < deadline {
        let submit = rng.uniform(0.0, 1.0) < share;
        let (path, name, (content_type, body)) = if submit {
            k += 1;
            let name = format!("load {w}-{k}");
            // A spectrum of its own: the generator seeded by this worker and request.
            let points = ir_points(&mut Rng::new(
                seed.wrapping_mul(1_000_003) ^ ((w as u64) << 32 | k as u64),
            ));
            let body = form(
                &[("technique", "ir"), ("name", &name)],
                "load.csv",
                &csv(&points),
            );
            ("/api/v1/spectra", Some(name), body)
        } else {
            let (file, bytes) = &unknowns[(w + done.len() * 7) % unknowns.len()];
            // Pending spectra too: a library filled by `bench_fill` holds nothing else.
            let body = form(
                &[("technique", "ir"), ("include_pending", "true")],
                file,
                bytes,
            );
            ("/api/v1/search", None, body)
        };
        let t = Instant::now();
        let r = agent
            .post(format!("{url}{path}"))
            .header("Authorization", &auth)
            .header("Content-Type", &content_type)
            .send(&body[..]);
        let (status, text) = match r {
            Ok(mut r) => {
                let status = r.status().as_u16();
                let text = r
                    .body_mut()
                    .read_to_string()
                    .unwrap_or_else(|e| e.to_string());
                (status, text)
            }
            Err(e) => (0, format!("transport: {e}")),
        };
        let ms = t.elapsed().as_secs_f64() * 1e3;
        let parsed: Option<Value> = serde_json::from_str(&text).ok();
        let mut error = None;
        let mut ack = None;
        if !(200..300).contains(&status) {
            error = Some(format!("{path}: {status} {text}"));
        } else if let Some(name) = name {
            match parsed.as_ref().and_then(|v| v["spectrum_id"].as_i64()) {
                Some(id) => ack = Some((name, id)),
                None => error = Some(format!("{path}: 2xx without a spectrum id: {text}")),
            }
        } else if parsed.as_ref().and_then(|v| v.get("hits")).is_none() {
            error = Some(format!("{path}: 2xx without hits: {text}"));
        }
        done.push(Done {
            submit,
            ms,
            error,
            ack,
        });
    }
    done
}

/// The search of the API's search route, timed in this process.
fn in_process(args: &[String]) -> anyhow::Result<()> {
    use whorl::library::Status;
    use whorl::search::{Given, Request, Unknown, search_file};
    use whorl::technique::Technique;
    let root = PathBuf::from(&args[0]);
    let dir = PathBuf::from(&args[1]);
    let repeats: usize = args[2].parse()?;
    let lib = whorl::library::Library::open(&root)?;
    let config = whorl::config::Config::load(&root)?;
    let mut request = Request::resolve(Technique::Ir, &Given::default(), &config);
    request.top = request.top.max(1);
    request.statuses.push(Status::Pending);
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)?
        .map(|e| e.map(|e| e.path()))
        .collect::<Result<_, _>>()?;
    files.sort();
    let mut ms = Vec::new();
    for round in 0..=repeats {
        for file in &files {
            let unknown = Unknown {
                technique: Technique::Ir,
                file: file.clone(),
                x_unit: None,
                y_unit: None,
                solvent: request.solvent,
            };
            let t = Instant::now();
            let (report, _) = search_file(&lib, &unknown, &request)?;
            let json = serde_json::to_value(&report)?;
            let took = t.elapsed().as_secs_f64() * 1e3;
            std::hint::black_box(json);
            // The first round warms the cache and the page cache.
            if round > 0 {
                ms.push(took);
            }
        }
    }
    ms.sort_by(f64::total_cmp);
    println!(
        "{}",
        json!({ "searches": ms.len(), "p50_ms": percentile(&ms, 0.5), "p99_ms": percentile(&ms, 0.99) })
    );
    Ok(())
}

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    if args.first().map(String::as_str) == Some("--in-process") && args.len() == 4 {
        return in_process(&args[1..]);
    }
    if args.len() < 6 {
        anyhow::bail!(
            "usage: bench_server URL TOKEN UNKNOWNS_DIR CLIENTS SECONDS SUBMIT_SHARE [SEED]"
        );
    }
    let url = args[0].trim_end_matches('/').to_string();
    let token = args[1].clone();
    let dir = PathBuf::from(&args[2]);
    let clients: usize = args[3].parse()?;
    let seconds: f64 = args[4].parse()?;
    let share: f64 = args[5].parse()?;
    let seed: u64 = args.get(6).map_or(Ok(7), |s| s.parse())?;
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)?
        .map(|e| e.map(|e| e.path()))
        .collect::<Result<_, _>>()?;
    files.sort();
    let unknowns: Vec<(String, Vec<u8>)> = files
        .iter()
        .map(|f| {
            let name = f
                .file_name()
                .unwrap_or_default()
                .to_string_lossy()
                .into_owned();
            Ok((name, std::fs::read(f)?))
        })
        .collect::<std::io::Result<_>>()?;
    if unknowns.is_empty() {
        anyhow::bail!("{} holds no unknowns", dir.display());
    }
    let start = Instant::now();
    let deadline = start + Duration::from_secs_f64(seconds);
    let results: Vec<Vec<Done>> = std::thread::scope(|s| {
        let handles: Vec<_> = (0..clients)
            .map(|w| {
                let (url, token, unknowns) = (&url, &token, &unknowns);
                s.spawn(move || worker(w, url, token, unknowns, deadline, share, seed))
            })
            .collect();
        handles
            .into_iter()
            .map(|h| h.join().expect("a worker panicked"))
            .collect()
    });
    let elapsed = start.elapsed().as_secs_f64();
    let all: Vec<&Done> = results.iter().flatten().collect();
    let mut out = json!({ "clients": clients, "seconds": elapsed, "submit_share": share });
    for (kind, submit) in [("search", false), ("submit", true)] {
        let of: Vec<&&Done> = all.iter().filter(|d| d.submit == submit).collect();
        let mut ms: Vec<f64> = of
            .iter()
            .filter(|d| d.error.is_none())
            .map(|d| d.ms)
            .collect();
        ms.sort_by(f64::total_cmp);
        out[kind] = json!({
            "requests": of.len(),
            "errors": of.iter().filter(|d| d.error.is_some()).count(),
            "p50_ms": percentile(&ms, 0.50),
            "p99_ms": percentile(&ms, 0.99),
            "max_ms": ms.last(),
            "per_second": ms.len() as f64 / elapsed,
        });
    }
    let errors: Vec<&String> = all.iter().filter_map(|d| d.error.as_ref()).collect();
    out["errors"] = json!(errors.len());
    out["first_errors"] = json!(errors.iter().take(5).collect::<Vec<_>>());
    out["acknowledged"] = json!(
        all.iter()
            .filter_map(|d| d.ack.as_ref())
            .map(|(name, id)| json!({ "name": name, "spectrum_id": id }))
            .collect::<Vec<_>>()
    );
    println!("{out}");
    Ok(())
}
