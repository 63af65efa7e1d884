//! Building a cache: the library streams its rows into a [`Builder`], which writes them
//! into a map (a temporary file, renamed into place when done, or anonymous memory) and
//! then the inverted index and the header.

use std::path::{Path, PathBuf};

use memmap2::MmapMut;

use super::file::VectorCache;
use super::layout::*;
use super::rows::{
    active_bins, choose_block, coarse_row, covered_row, dense_row, entropy_row, posting_weight,
    quantise, weights,
};
use super::{Snapshot, VectorRow};
use crate::error::{Error, Result};
use crate::prepare::covered_bins;
use crate::score::CompositeParams;
use crate::spectrum::Status;
use crate::technique::{Grid, Technique};

/// A cache under construction. The library makes one with the counts and a sample of the
/// rows it is about to stream ([`Builder::new`]), pushes every row in ascending id order
/// ([`Builder::push`]), and seals it with the state it read them from ([`Builder::finish`]).
/// Nothing here reads the library: the builder is handed what it holds.
pub struct Builder {
    map: MmapMut,
    /// Where the file goes when it is done: the temporary file being filled, and the path it
    /// is renamed to. `None` for a cache in anonymous memory.
    target: Option<(tempfile::NamedTempFile, PathBuf)>,
    layout: Layout,
    technique: Technique,
    kind: Kind,
    grid: Grid,
    active: Vec<bool>,
    params: CompositeParams,
    row: usize,
    peak: usize,
    integer_x: bool,
}

fn changed() -> Error {
    Error::Changing {
        what: "vector cache".into(),
    }
}

impl Builder {
    /// A builder for `rows` rows holding `nnz` peaks in all. `sample` holds up to
    /// [`BLOCK_SAMPLE`] of the prepared vectors, from which a dense cache chooses its coarse
    /// block size. With `dir`, the cache is written to a temporary file there and renamed
    /// into place by [`Builder::finish`]; without, it lives in anonymous memory (in-memory
    /// libraries, read-only folders).
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        technique: Technique,
        kind: Kind,
        grid: &Grid,
        params: &CompositeParams,
        (rows, nnz): (usize, usize),
        sample: &[Vec<f32>],
        dir: Option<&Path>,
    ) -> Result<Builder> {
        let active = active_bins(grid);
        let block = if kind.dense() {
            let sample: Vec<Vec<f32>> = sample
                .iter()
                .filter(|v| v.len() == grid.len())
                .map(|v| dense_row(v, kind, &active))
                .collect();
            choose_block(&sample)
        } else {
            NO_BLOCK
        };
        let layout = Layout::new(kind, grid.len(), rows, nnz, block);
        let (map, target) = match dir {
            Some(dir) => {
                std::fs::create_dir_all(dir)
                    .map_err(|e| Error::io(format!("creating {}", dir.display()), e))?;
                remove_abandoned(dir);
                let tmp = tempfile::Builder::new()
                    .prefix(&format!("{BUILDING}{}-", std::process::id()))
                    .tempfile_in(dir)
                    .map_err(|e| Error::io(format!("creating a file in {}", dir.display()), e))?;
                // Every block is allocated before the file is mapped: writing through a map
                // into a sparse file on a full disk kills the process with SIGBUS, while a
                // failed allocation is an error that says so (and the temporary file goes).
                allocate(tmp.as_file(), layout.len.max(HEADER) as u64)
                    .map_err(|e| Error::io("allocating the vector cache on disk", e))?;
                // SAFETY: the temporary file is ours alone until it is renamed into place.
                let map = unsafe { MmapMut::map_mut(tmp.as_file()) }
                    .map_err(|e| Error::io("mapping the vector cache", e))?;
                (map, Some((tmp, dir.join(file_name(technique, kind)))))
            }
            None => {
                let map = MmapMut::map_anon(layout.len.max(1))
                    .map_err(|e| Error::io("allocating a vector cache", e))?;
                (map, None)
            }
        };
        Ok(Builder {
            map,
            target,
            layout,
            technique,
            kind,
            grid: grid.clone(),
            active,
            params: *params,
            row: 0,
            peak: 0,
            integer_x: true,
        })
    }

    /// Rows the builder expects.
    pub fn rows(&self) -> usize {
        self.layout.rows
    }

    /// Rows pushed so far.
    pub fn pushed(&self) -> usize {
        self.row
    }

    /// Seals the cache: checks that every expected row came, builds the inverted index of a
    /// sparse cache, writes the header (the magic last) tagged with `snapshot`, and renames
    /// a file into place (synced first, so readers see the old cache or the new one, never
    /// half of one).
    pub fn finish(mut self, snapshot: &Snapshot) -> Result<VectorCache> {
        let l = self.layout;
        if self.row != l.rows || self.peak != l.nnz {
            return Err(changed());
        }
        if !self.kind.dense() {
            fill_postings(&mut self.map, &l);
        }
        write_header(
            &mut self.map,
            &Tag {
                layout: l,
                kind: self.kind,
                dim: self.grid.len(),
                params: self.params,
                integer_x: self.integer_x,
                technique: self.technique,
                snapshot,
            },
        );
        match self.target {
            None => {
                let map = self
                    .map
                    .make_read_only()
                    .map_err(|e| Error::io("sealing a vector cache", e))?;
                Ok(VectorCache::from_parts(
                    map,
                    l,
                    self.technique,
                    self.kind,
                    self.grid.len(),
                    snapshot.clone(),
                    self.params,
                    self.integer_x,
                ))
            }
            Some((tmp, path)) => {
                self.map
                    .flush()
                    .map_err(|e| Error::io("writing the vector cache", e))?;
                drop(self.map);
                tmp.as_file()
                    .sync_all()
                    .map_err(|e| Error::io("syncing the vector cache", e))?;
                tmp.persist(&path)
                    .map_err(|e| Error::io(format!("renaming into {}", path.display()), e.error))?;
                VectorCache::open(&path, self.technique, self.kind)
            }
        }
    }

    /// Writes the next row (rows come in ascending id order).
    pub fn push(&mut self, r: VectorRow) -> Result<()> {
        let (i, l) = (self.row, self.layout);
        if i >= l.rows {
            return Err(changed());
        }
        section_mut::<i64>(&mut self.map, l.offsets[IDS], l.rows)[i] = r.spectrum_id;
        section_mut::<u8>(&mut self.map, l.offsets[STATUS], l.rows)[i] =
            u8::from(r.status == Status::Verified);
        section_mut::<u32>(&mut self.map, l.offsets[NPOS], l.rows)[i] =
            r.peaks.iter().filter(|p| p.height > 0.0).count() as u32;
        if self.kind.dense() {
            if r.vector.len() != self.grid.len() {
                return Err(Error::invalid(
                    format!(
                        "spectrum {} has {} values on a grid of {}",
                        r.spectrum_id,
                        r.vector.len(),
                        self.grid.len()
                    ),
                    "run `whorl check`: the stored prepared vector does not match the recipe",
                ));
            }
            // The row over its own active bins: the unmasked bins its spectrum covers.
            let bins = covered_bins(r.coverage.as_ref(), &self.grid);
            let row = covered_row(&r.vector, self.kind, &self.active, bins.clone());
            let (sum, squares) = row.iter().fold((0f64, 0f64), |(s, q), &a| {
                let a = f64::from(a);
                (s + a, q + a * a)
            });
            section_mut::<f64>(&mut self.map, l.offsets[COVER], 4 * l.rows)[4 * i..4 * i + 4]
                .copy_from_slice(&[bins.start as f64, bins.end as f64, sum, squares]);
            let (q, scale, l1) = quantise(&row);
            let s = l.stride;
            section_mut::<f32>(&mut self.map, l.offsets[F32], l.rows * s)[i * s..i * s + row.len()]
                .copy_from_slice(&row);
            section_mut::<i8>(&mut self.map, l.offsets[I8], l.rows * s)[i * s..i * s + q.len()]
                .copy_from_slice(&q);
            section_mut::<f32>(&mut self.map, l.offsets[SCALE], l.rows)[i] = scale;
            section_mut::<f32>(&mut self.map, l.offsets[L1], l.rows)[i] = l1;
            let (coarse, rest) = coarse_row(&row, l.coarse_stride, l.block);
            let (q, scale, l1) = quantise(&coarse);
            let cs = l.coarse_stride;
            section_mut::<i8>(&mut self.map, l.offsets[CI8], l.rows * cs)[i * cs..(i + 1) * cs]
                .copy_from_slice(&q);
            section_mut::<f32>(&mut self.map, l.offsets[CSCALE], l.rows)[i] = scale;
            section_mut::<f32>(&mut self.map, l.offsets[CL1], l.rows)[i] = l1;
            section_mut::<f32>(&mut self.map, l.offsets[CREST], l.rows)[i] = rest;
        }
        let start = self.peak;
        let end = start + r.peaks.len();
        if end > l.nnz {
            return Err(changed());
        }
        for (k, p) in r.peaks.iter().enumerate() {
            section_mut::<f32>(&mut self.map, l.offsets[PX], l.nnz)[start + k] = p.x as f32;
            self.integer_x &= p.x.fract() == 0.0 && (0.0..65536.0).contains(&p.x);
        }
        if !self.kind.dense() {
            let w = match self.kind {
                Kind::Entropy => entropy_row(&r.peaks),
                _ => weights(&r.peaks, &self.params),
            };
            for (k, p) in r.peaks.iter().enumerate() {
                section_mut::<f32>(&mut self.map, l.offsets[PH], l.nnz)[start + k] =
                    p.height as f32;
                section_mut::<u16>(&mut self.map, l.offsets[PBIN], l.nnz)[start + k] =
                    p.x.round().clamp(0.0, 65535.0) as u16;
                section_mut::<f32>(&mut self.map, l.offsets[PW], l.nnz)[start + k] = w[k];
            }
        }
        section_mut::<u64>(&mut self.map, l.offsets[POFF], l.rows + 1)[i + 1] = end as u64;
        self.peak = end;
        self.row += 1;
        Ok(())
    }
}

/// The prefix of a cache file under construction, followed by the building process's id.
const BUILDING: &str = ".building-";

/// Gives `file` all `len` bytes on disk, so that writing through a map of it cannot fail.
fn allocate(file: &std::fs::File, len: u64) -> std::io::Result<()> {
    #[cfg(unix)]
    {
        use rustix::fs::{FallocateFlags, fallocate};
        match fallocate(file, FallocateFlags::empty(), 0, len) {
            Ok(()) => return Ok(()),
            // Filesystems without fallocate: zeros written the ordinary way below.
            Err(e) if e == rustix::io::Errno::OPNOTSUPP => {}
            Err(e) => return Err(e.into()),
        }
    }
    use std::io::{Seek, Write};
    let mut f = file;
    f.seek(std::io::SeekFrom::Start(0))?;
    let zeros = vec![0u8; 1 << 20];
    let mut left = len;
    while left > 0 {
        let n = left.min(zeros.len() as u64) as usize;
        f.write_all(&zeros[..n])?;
        left -= n as u64;
    }
    f.flush()
}

/// Removes the temporary files of builds that were killed (by a crash, a full disk, a
/// kill -9) in `dir`: each is named with its process's id, and a process that no longer runs
/// will not finish its file. Where the running processes cannot be listed (no `/proc`), a
/// leftover is removed once it is a day old.
pub fn remove_abandoned(dir: &Path) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    let procs = Path::new("/proc/self").exists();
    for e in entries.flatten() {
        let name = e.file_name();
        let Some(rest) = name.to_str().and_then(|n| n.strip_prefix(BUILDING)) else {
            continue;
        };
        let pid: Option<u32> = rest.split('-').next().and_then(|p| p.parse().ok());
        let abandoned = match pid {
            Some(pid) if procs => !Path::new(&format!("/proc/{pid}")).exists(),
            _ => e
                .metadata()
                .and_then(|m| m.modified())
                .ok()
                .and_then(|t| t.elapsed().ok())
                .is_some_and(|age| age.as_secs() > 24 * 3600),
        };
        if abandoned {
            let _ = std::fs::remove_file(e.path());
        }
    }
}

/// Builds the inverted index of a filled sparse cache: a count per m/z, offsets by prefix
/// sum, then every row's peaks placed in row order, so each m/z's rows come out ascending.
fn fill_postings(map: &mut [u8], l: &Layout) {
    // The postings come after every section they are made from, so the map splits there.
    let at = l.offsets[POST_OFF];
    let (src, dst) = map.split_at_mut(at);
    let off: &[u64] = section(src, l.offsets[POFF], l.rows + 1);
    let bins: &[u16] = section(src, l.offsets[PBIN], l.nnz);
    let heights: &[f32] = section(src, l.offsets[PH], l.nnz);
    let weights: &[f32] = section(src, l.offsets[PW], l.nnz);
    let mut start = vec![0u64; MZ_BINS + 1];
    for &b in bins {
        start[usize::from(b) + 1] += 1;
    }
    for i in 0..MZ_BINS {
        start[i + 1] += start[i];
    }
    section_mut::<u64>(dst, 0, MZ_BINS + 1).copy_from_slice(&start);
    let (rows_at, w_at) = (l.offsets[POST_ROW] - at, l.offsets[POST_W] - at);
    let (rows_part, w_part) = dst.split_at_mut(w_at);
    let rows: &mut [u32] = section_mut(rows_part, rows_at, l.nnz);
    let ws: &mut [f32] = section_mut(w_part, 0, l.nnz);
    for r in 0..l.rows {
        for k in off[r] as usize..off[r + 1] as usize {
            let next = &mut start[usize::from(bins[k])];
            rows[*next as usize] = r as u32;
            ws[*next as usize] = posting_weight(heights[k], weights[k]);
            *next += 1;
        }
    }
}
