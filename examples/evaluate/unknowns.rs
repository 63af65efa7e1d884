//! Degraded unknowns synthesised from the seed tables, per technique and level.

use std::collections::BTreeMap;

use whorl::prepare::{Conditions, Solvent};
use whorl::spectrum::YUnit;
use whorl::technique::Technique;

use crate::Level;
use crate::rng::Rng;
use crate::seed::{Band, Compound};
use crate::shapes::{fluorescence, ir_absorbance, nmr_spectrum, raman_signal, raman_xs};

/// Indices of `k` bands chosen among those no taller than `max_height` (weak bands are the
/// ones an unknown loses first).
pub fn drop_bands(bands: &[Band], k: usize, max_height: f64, rng: &mut Rng) -> Vec<usize> {
    let mut pool: Vec<usize> = (0..bands.len())
        .filter(|&i| bands[i].height <= max_height)
        .collect();
    let mut out = Vec::new();
    while out.len() < k && !pool.is_empty() {
        out.push(pool.remove(rng.pick(pool.len())));
    }
    out
}

// --- Degraded unknowns ------------------------------------------------------------------------

/// A synthetic unknown: points and the conditions an analyst would declare.
pub struct Unknown {
    pub points: Vec<(f64, f64)>,
    pub conditions: Conditions,
}

/// IR. mild: noise sd 0.002 A, slope 0.02 A, shift +-1 cm-1. moderate (the demo's u01): noise
/// 0.01, slope 0.08, shift +-3, one weak band (<= 0.3) missing, every other unknown in percent
/// transmittance. severe: noise 0.03, slope 0.2, shift +-6, two bands (<= 0.5) missing,
/// every other unknown in percent transmittance.
pub fn ir_unknown(
    c: &Compound,
    level: Level,
    rng: &mut Rng,
    jitter: &mut Rng,
    odd: bool,
) -> Unknown {
    let (noise, slope, shift, missing, max_h, percent) = match level {
        Level::Mild => (0.002, 0.02, 1.0, 0, 0.0, false),
        Level::Moderate => (0.01, 0.08, 3.0, 1, 0.3, odd),
        Level::Severe => (0.03, 0.2, 6.0, 2, 0.5, odd),
    };
    let shift = shift * rng.sign();
    let dropped = drop_bands(&c.ir, missing, max_h, rng);
    let points = (0..=1800)
        .map(|i| {
            let x = 4000.0 - 2.0 * i as f64;
            let mut a = ir_absorbance(&c.ir, x, shift, &dropped);
            a += slope * i as f64 / 1800.0 + noise * jitter.gauss();
            (x, if percent { 100.0 * 10f64.powf(-a) } else { a })
        })
        .collect();
    Unknown {
        points,
        conditions: Conditions {
            y_unit: Some(if percent {
                YUnit::TransmittancePercent
            } else {
                YUnit::Absorbance
            }),
            solvent: None,
        },
    }
}

/// Raman. mild: peak 8000 counts, no fluorescence, shift +-1 cm-1. moderate (the demo's
/// u06): peak 4000 counts on a fluorescence background rising to about 6000, shift +-2, one
/// weak band (<= 0.3) missing. severe (the demo's u08): peak 1500 counts on a background
/// rising to about 4000, shift +-4, two bands (<= 0.5) missing. Shot noise throughout.
pub fn raman_unknown(c: &Compound, level: Level, rng: &mut Rng, jitter: &mut Rng) -> Unknown {
    let (peak, fluor, shift, missing, max_h) = match level {
        Level::Mild => (8000.0, 0.0, 1.0, 0, 0.0),
        Level::Moderate => (4000.0, 6000.0, 2.0, 1, 0.3),
        Level::Severe => (1500.0, 4000.0, 4.0, 2, 0.5),
    };
    let shift = shift * rng.sign();
    let dropped = drop_bands(&c.raman, missing, max_h, rng);
    let xs = raman_xs();
    let signal: Vec<f64> = xs
        .iter()
        .map(|&x| raman_signal(&c.raman, x, shift, &dropped))
        .collect();
    let top = signal.iter().copied().fold(0.0, f64::max).max(1e-12);
    let points = xs
        .iter()
        .zip(&signal)
        .map(|(&x, &s)| {
            let background = fluorescence(x, fluor);
            let mean = 200.0 + peak * s / top + background;
            (x, (mean + mean.sqrt() * jitter.gauss()).max(0.0).round())
        })
        .collect();
    Unknown {
        points,
        conditions: Conditions {
            y_unit: Some(YUnit::Counts),
            solvent: None,
        },
    }
}

/// EI-MS. mild: abundance noise +-5 %, ions below 1 % of the base peak lost. moderate (the
/// demo's u09-u11): noise +-10 %, ions below 5 % lost, a co-eluting contaminant (another
/// library compound) at 15 % and two background ions (air m/z 28, 32 or column bleed 207,
/// 281) at 10-40 %. severe: noise +-20 %, ions below 10 % lost, contaminant at 40 %,
/// background ions.
pub fn ms_unknown(
    c: &Compound,
    all: &[Compound],
    me: usize,
    level: Level,
    rng: &mut Rng,
    jitter: &mut Rng,
) -> Unknown {
    let (noise, floor, contaminant, background) = match level {
        Level::Mild => (0.05, 1.0, 0.0, false),
        Level::Moderate => (0.10, 5.0, 0.15, true),
        Level::Severe => (0.20, 10.0, 0.40, true),
    };
    let mut ions: BTreeMap<i64, f64> = BTreeMap::new();
    for &(mz, rel) in &c.ms {
        if rel >= floor {
            *ions.entry(mz as i64).or_default() += rel * jitter.range(1.0 - noise, 1.0 + noise);
        }
    }
    if contaminant > 0.0 {
        let mut other = rng.pick(all.len() - 1);
        if other >= me {
            other += 1;
        }
        for &(mz, rel) in &all[other].ms {
            if rel * contaminant >= floor {
                *ions.entry(mz as i64).or_default() += rel * contaminant;
            }
        }
    }
    if background {
        let pair = if rng.uniform() < 0.5 {
            [28, 32]
        } else {
            [207, 281]
        };
        for mz in pair {
            *ions.entry(mz).or_default() += rng.range(10.0, 40.0);
        }
    }
    let top = ions.values().copied().fold(0.0, f64::max);
    let points = ions
        .into_iter()
        .map(|(mz, v)| (mz as f64, ((1000.0 * v / top).round() / 10.0).max(0.1)))
        .collect();
    Unknown {
        points,
        conditions: Conditions {
            y_unit: Some(YUnit::Relative),
            solvent: None,
        },
    }
}

/// A solvent whose residual and water signals stay 0.15 ppm clear of the compound's signals
/// (as the generator requires), other than `not`.
pub fn other_solvent(c: &Compound, rng: &mut Rng) -> Solvent {
    let clear: Vec<Solvent> = Solvent::ALL
        .into_iter()
        .filter(|&s| s != c.h_solvent)
        .filter(|s| {
            let refs: Vec<f64> = s
                .residual_ppm()
                .into_iter()
                .chain([s.water_ppm()])
                .collect();
            c.h.iter()
                .all(|sig| refs.iter().all(|r| (sig.ppm - r).abs() > 0.15))
        })
        .collect();
    if clear.is_empty() {
        c.h_solvent
    } else {
        clear[rng.pick(clear.len())]
    }
}

/// 1H NMR. mild: noise 0.3 % of the tallest line, shift +-0.005 ppm. moderate (the demo's
/// u12-u15): noise 1 %, shift +-0.01 ppm, lines 0.008 ppm wide, a baseline tilt of 0.5 % of
/// the tallest line, every other unknown in another solvent. severe: noise 3 %, shift +-0.02,
/// lines 0.012 ppm, tilt 2 %, another solvent, one signal missing.
pub fn h_unknown(
    c: &Compound,
    level: Level,
    rng: &mut Rng,
    jitter: &mut Rng,
    odd: bool,
) -> Unknown {
    let (noise, shift, lw, tilt, other, missing) = match level {
        Level::Mild => (0.003, 0.005, 0.006, 0.0, false, 0),
        Level::Moderate => (0.01, 0.01, 0.008, 0.005, odd, 0),
        Level::Severe => (0.03, 0.02, 0.012, 0.02, true, 1),
    };
    let shift = shift * rng.sign();
    let solvent = if other {
        other_solvent(c, rng)
    } else {
        c.h_solvent
    };
    let skip = if missing > 0 && c.h.len() > 1 {
        Some(rng.pick(c.h.len()))
    } else {
        None
    };
    let kept =
        c.h.iter()
            .enumerate()
            .filter(|(k, _)| Some(*k) != skip)
            .map(|(_, s)| s);
    let points = nmr_spectrum(kept, solvent, shift, lw)
        .into_iter()
        .map(|(x, y)| {
            let base = 1000.0 * tilt * (x + 0.5) / 13.0;
            (x, y + base + 1000.0 * noise * jitter.gauss())
        })
        .collect();
    Unknown {
        points,
        conditions: Conditions {
            y_unit: Some(YUnit::Intensity),
            solvent: Some(solvent),
        },
    }
}

/// 13C NMR peak list. mild: shift scatter sd 0.1 ppm. moderate: scatter 0.3, a referencing
/// offset of +-0.3 ppm, one line missing (a carbon without H if there is one: the weakest),
/// every other list without intensities. severe: scatter 0.5, offset +-0.6, two lines missing,
/// one impurity line. The solvent's own lines and TMS are listed and the solvent declared.
pub fn c_unknown(
    c: &Compound,
    level: Level,
    rng: &mut Rng,
    jitter: &mut Rng,
    odd: bool,
) -> Unknown {
    let (scatter, offset, missing, impurity, unit) = match level {
        Level::Mild => (0.1, 0.0, 0, false, false),
        Level::Moderate => (0.3, 0.3, 1, false, odd),
        Level::Severe => (0.5, 0.6, 2, true, true),
    };
    let offset = offset * rng.sign();
    let mut order: Vec<usize> = (0..c.c.len()).collect();
    // Lines lost first: carbons without H, then any.
    order.sort_by_key(|&i| (!c.c[i].quaternary, rng.next()));
    let keep_at_least = 1;
    let lost: Vec<usize> = order
        .into_iter()
        .take(missing.min(c.c.len().saturating_sub(keep_at_least)))
        .collect();
    let mut lines: Vec<(f64, f64)> =
        c.c.iter()
            .enumerate()
            .filter(|(k, _)| !lost.contains(k))
            .map(|(_, s)| {
                (
                    s.ppm + offset + scatter * jitter.gauss(),
                    s.n * if s.quaternary { 0.3 } else { 1.0 },
                )
            })
            .collect();
    if impurity {
        lines.push((rng.range(10.0, 200.0), 0.2));
    }
    let top = lines.iter().map(|l| l.1).fold(0.0, f64::max);
    for &centre in c.c_solvent.carbon_ppm() {
        for k in -1i32..=1 {
            lines.push((centre + f64::from(k) * 0.32, 0.6 * top));
        }
    }
    lines.push((0.0, 0.1 * top));
    let points = lines
        .into_iter()
        .map(|(p, h)| (p, if unit { 1.0 } else { h }))
        .collect();
    Unknown {
        points,
        conditions: Conditions {
            y_unit: Some(YUnit::Intensity),
            solvent: Some(c.c_solvent),
        },
    }
}

/// One degraded unknown. `repeat` 0 is the unknown itself; another `repeat` is a repeat
/// measurement of the same sample: the same systematic degradations (shift, missing bands,
/// contaminant, solvent, offset) drawn from the same stream, with fresh random noise.
/// `run` 0 draws from the streams of the reported set; another `run` prefixes the stream
/// seeds with it (the tuning set).
pub fn make_unknown(
    t: Technique,
    all: &[Compound],
    k: usize,
    level: Level,
    (run, replicate): (u64, u64),
    repeat: u64,
) -> Unknown {
    let stream = |extra: &[u64]| {
        let mut parts: Vec<u64> = if run == 0 { vec![] } else { vec![run] };
        parts.extend([t as u64, k as u64, level as u64, replicate]);
        parts.extend(extra);
        Rng::new(&parts)
    };
    let mut rng = stream(&[]);
    let mut jitter = stream(&[1 + repeat]);
    let odd = (k as u64 + replicate) % 2 == 1;
    let c = &all[k];
    match t {
        Technique::Ir => ir_unknown(c, level, &mut rng, &mut jitter, odd),
        Technique::Raman => raman_unknown(c, level, &mut rng, &mut jitter),
        Technique::MsEi => ms_unknown(c, all, k, level, &mut rng, &mut jitter),
        Technique::Nmr1h => h_unknown(c, level, &mut rng, &mut jitter, odd),
        Technique::Nmr13c => c_unknown(c, level, &mut rng, &mut jitter, odd),
    }
}
