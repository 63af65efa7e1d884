//! Counting outcomes, and the markdown tables they are reported in.

use crate::data::Part;

/// Top-1 and top-5 counts over a number of queries.
#[derive(Debug, Clone, Copy, Default)]
pub struct Tally {
    pub n: usize,
    pub top1: usize,
    pub top5: usize,
}

impl Tally {
    /// Counts one query whose right answer came at `rank` (1-based; `None` when not listed).
    pub fn add(&mut self, rank: Option<usize>) {
        self.n += 1;
        self.top1 += usize::from(rank == Some(1));
        self.top5 += usize::from(rank.is_some_and(|r| r <= 5));
    }

    /// A fraction with its binomial standard error, sqrt(p (1 - p) / n).
    fn cell(&self, k: usize) -> String {
        if self.n == 0 {
            return "-".to_string();
        }
        let p = k as f64 / self.n as f64;
        let se = (p * (1.0 - p) / self.n as f64).sqrt();
        format!("{p:.3} ± {se:.3}")
    }
}

/// The rank (1-based) of the first label equal to `truth` in a ranked list of labels.
pub fn rank<'a>(ranked: impl Iterator<Item = &'a str>, truth: &str) -> Option<usize> {
    ranked.take(5).position(|l| l == truth).map(|i| i + 1)
}

/// One line of a table: a variant (or the baseline) and its tallies per part.
pub struct Row {
    pub label: String,
    pub default: bool,
    pub parts: [Tally; 2],
}

impl Row {
    pub fn new(label: impl Into<String>, default: bool) -> Row {
        Row {
            label: label.into(),
            default,
            parts: [Tally::default(); 2],
        }
    }

    pub fn add(&mut self, part: Part, rank: Option<usize>) {
        self.parts[part as usize].add(rank);
    }
}

/// The verdicts of the default scoring in one part: on the lists whose first hit is right,
/// and on the same lists with every hit of the true identity withdrawn (as if it were not in
/// the library; scores are pairwise, so this is the search of a library without it).
#[derive(Debug, Clone, Default)]
pub struct Verdicts {
    pub correct: usize,
    pub correct_no_match: usize,
    pub absent: usize,
    pub absent_words: std::collections::BTreeMap<&'static str, usize>,
    /// The discriminant (Lam et al. 2007) of each list whose first hit is right.
    pub right_best: Vec<f64>,
    /// The discriminant of each list with the true identity withdrawn (0 when nothing is
    /// left).
    pub absent_best: Vec<f64>,
    /// The best score alone of each list whose first hit is right, for comparison.
    pub right_score: Vec<f64>,
    /// The best score alone of each list with the true identity withdrawn (0 when nothing is
    /// left).
    pub absent_score: Vec<f64>,
    /// Lists whose first hit is wrong (the true identity among the hits or not).
    pub wrong: usize,
    /// Of those, the lists called ambiguous with the true identity among the candidates
    /// named: the analyst is told that the first hit is not the only possible answer.
    pub wrong_named: usize,
    /// Of those, the lists called no acceptable match.
    pub wrong_no_match: usize,
    /// Whether the protocol's lists carry the similar-references warning (EI without a
    /// retention index, the query's own original in the library).
    pub twins_checked: bool,
    /// Lists whose first hit is right and that warn of similar references.
    pub right_twin_warned: usize,
    /// Lists whose first hit is wrong and whose similar-references warning names the right
    /// identity.
    pub wrong_twin_named: usize,
    /// Lists whose first hit is wrong and that say so in one of these ways: ambiguous with
    /// the right identity named, no acceptable match, or a similar-references warning naming
    /// the right identity.
    pub wrong_flagged: usize,
}

impl Verdicts {
    /// Counts one query from the hits the protocol sees (best first), whether its first hit
    /// was right, and which hits are of the true identity.
    pub fn add_hits(
        &mut self,
        hits: Vec<whorl::search::Hit>,
        confidence: &whorl::search::Confidence,
        tag: &str,
        right_first: bool,
        is_truth: impl Fn(&whorl::search::Hit) -> bool,
        warnings: Option<&[whorl::search::Warning]>,
    ) {
        use whorl::search::{WarningCode, verdict};
        let on_list = verdict(&hits, confidence);
        let twin =
            warnings.and_then(|ws| ws.iter().find(|w| w.code == WarningCode::SimilarReferences));
        self.twins_checked |= warnings.is_some();
        if right_first {
            self.right_twin_warned += usize::from(twin.is_some());
        } else {
            self.wrong += 1;
            let truth: Vec<&str> = hits
                .iter()
                .filter(|h| is_truth(h))
                .map(|h| h.name.as_str())
                .collect();
            let named = match &on_list {
                whorl::search::Verdict::Ambiguous { candidates, .. } => {
                    candidates.iter().any(|c| truth.contains(&c.as_str()))
                }
                _ => false,
            };
            let no_match = matches!(on_list, whorl::search::Verdict::NoAcceptableMatch { .. });
            // The warning names each compound as "name (similarity)".
            let twin_named = twin.is_some_and(|w| {
                truth.iter().any(|name| {
                    ["0.", "1."]
                        .iter()
                        .any(|d| w.message.contains(&format!("{name} ({d}")))
                })
            });
            self.wrong_named += usize::from(named);
            self.wrong_no_match += usize::from(no_match);
            self.wrong_twin_named += usize::from(twin_named);
            self.wrong_flagged += usize::from(named || no_match || twin_named);
        }
        let absent: Vec<_> = hits.iter().filter(|h| !is_truth(h)).cloned().collect();
        let without = verdict(&absent, confidence);
        dump(tag, &hits, &absent, right_first);
        // The discriminant, whatever the list's own thresholds apply to, so that both bases
        // are derived from the same values whichever `THRESHOLDS` holds now.
        let evidence = whorl::search::Evidence::Discriminant;
        if right_first {
            self.right_best
                .push(evidence.of(&hits).expect("a right first hit"));
            self.right_score.push(hits[0].score);
        }
        self.absent_best.push(evidence.of(&absent).unwrap_or(0.0));
        self.absent_score
            .push(absent.first().map_or(0.0, |h| h.score));
        self.add(right_first, on_list.word(), without.word());
    }

    fn add(&mut self, right_first: bool, list: &str, absent: &'static str) {
        if right_first {
            self.correct += 1;
            self.correct_no_match += usize::from(list == "no-acceptable-match");
        }
        self.absent += 1;
        *self.absent_words.entry(absent).or_default() += 1;
    }

    fn share(k: usize, n: usize) -> String {
        if n == 0 {
            "-".to_string()
        } else {
            format!("{:.3} ({k} of {n})", k as f64 / n as f64)
        }
    }
}

/// The weak score the real tuning evidence supports, for the verdict targets: at least 90 %
/// of searches with the true identity withdrawn below it, at most 5 % of right first hits.
/// Where no threshold meets both, the one that misses them by the smallest multiple of their
/// allowances (10 % and 5 %): the smallest `max(miss / 0.10, rejected / 0.05)` over the
/// thresholds 0.01, 0.02, ..., 1.00, the higher on a tie.
#[derive(Debug, Clone, Copy)]
pub struct Derived {
    pub weak_score: f64,
    /// Withdrawn-identity searches whose best score is at or above it.
    pub miss: f64,
    /// Right first hits scoring below it.
    pub rejected: f64,
}

/// Which value of a list the threshold applies to.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Basis {
    /// The discriminant of Lam et al. 2007 (`Evidence::Discriminant`).
    Evidence,
    /// The best score alone.
    Score,
}

impl Verdicts {
    /// The values of right first hits and of withdrawn-identity lists on `basis`.
    pub fn values(&self, basis: Basis) -> (&[f64], &[f64]) {
        match basis {
            Basis::Evidence => (&self.right_best, &self.absent_best),
            Basis::Score => (&self.right_score, &self.absent_score),
        }
    }

    /// Under threshold `w` on `basis`: the share of right first hits below it, and the share
    /// of withdrawn-identity lists below it (called no acceptable match).
    pub fn under(&self, basis: Basis, w: f64) -> (String, String) {
        let (right, absent) = self.values(basis);
        (
            Verdicts::share(right.iter().filter(|&&s| s < w).count(), right.len()),
            Verdicts::share(absent.iter().filter(|&&s| s < w).count(), absent.len()),
        )
    }
}

impl Derived {
    pub fn from(tuning: &[&Verdicts], basis: Basis) -> Derived {
        let right: Vec<f64> = tuning
            .iter()
            .flat_map(|v| v.values(basis).0.to_vec())
            .collect();
        let absent: Vec<f64> = tuning
            .iter()
            .flat_map(|v| v.values(basis).1.to_vec())
            .collect();
        assert!(!right.is_empty() && !absent.is_empty(), "tuning evidence");
        let share = |k: usize, n: usize| k as f64 / n as f64;
        let mut best: Option<(f64, Derived)> = None;
        for k in 1..=100 {
            let w = f64::from(k) / 100.0;
            let miss = share(absent.iter().filter(|&&s| s >= w).count(), absent.len());
            let rejected = share(right.iter().filter(|&&s| s < w).count(), right.len());
            let cost = (miss / 0.10).max(rejected / 0.05);
            if best.is_none_or(|(c, _)| cost <= c) {
                best = Some((
                    cost,
                    Derived {
                        weak_score: w,
                        miss,
                        rejected,
                    },
                ));
            }
        }
        best.expect("thresholds tried").1
    }
}

/// With `WHORL_VERDICT_DUMP=FILE`, appends one JSON line per query (the first hits of its
/// list and of the list with the true identity withdrawn) for studying the verdict rule.
fn dump(tag: &str, hits: &[whorl::search::Hit], absent: &[whorl::search::Hit], right_first: bool) {
    use std::io::Write;
    let Some(path) = std::env::var_os("WHORL_VERDICT_DUMP") else {
        return;
    };
    let line = serde_json::json!({
        "tag": tag,
        "right_first": right_first,
        "hits": &hits[..hits.len().min(5)],
        "absent": &absent[..absent.len().min(5)],
        "scores": hits.iter().map(|h| (h.score, h.compound_id)).collect::<Vec<_>>(),
        "absent_scores": absent.iter().map(|h| (h.score, h.compound_id)).collect::<Vec<_>>(),
    });
    let mut f = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(path)
        .expect("dump file");
    writeln!(f, "{line}").expect("dump");
}

/// The verdict words in the order of the table.
const WORDS: [&str; 5] = [
    "no-acceptable-match",
    "ambiguous",
    "probable",
    "strong-candidate",
    "possible-mixture",
];

/// One protocol's table.
pub struct Table {
    pub title: &'static str,
    /// What is searched against what, and what counts as right.
    pub protocol: String,
    /// Source and licence of the data.
    pub source: &'static str,
    pub rows: Vec<Row>,
    /// The default scoring's verdicts per part (tuning, reported), when measured.
    pub verdicts: Option<[Verdicts; 2]>,
    /// Markdown printed after the tables (a derivation that belongs to this protocol).
    pub extra: Option<String>,
}

impl Table {
    pub fn print(&self) {
        println!("## {}", self.title);
        println!();
        println!("{}", self.protocol);
        println!();
        println!("Data: {}", self.source);
        println!();
        let n = |p: Part| {
            let counts: Vec<usize> = self.rows.iter().map(|r| r.parts[p as usize].n).collect();
            assert!(
                counts.windows(2).all(|w| w[0] == w[1]),
                "{}: every row counts the same queries",
                self.title
            );
            counts[0]
        };
        println!(
            "| variant | tuning top-1 (n = {}) | tuning top-5 | reported top-1 (n = {}) | reported top-5 |",
            n(Part::Tuning),
            n(Part::Reported)
        );
        println!("|---|---|---|---|---|");
        for r in &self.rows {
            let b = |x: String| if r.default { format!("**{x}**") } else { x };
            let [t, p] = r.parts;
            println!(
                "| {} | {} | {} | {} | {} |",
                b(r.label.clone()),
                t.cell(t.top1),
                t.cell(t.top5),
                b(p.cell(p.top1)),
                p.cell(p.top5)
            );
        }
        println!();
        if let Some(v) = &self.verdicts {
            use whorl::score::ScoreParams;
            use whorl::search::{Evidence, confidence_for};
            use whorl::technique::Technique;
            let technique = if self.title.starts_with("EI-MS") {
                Technique::MsEi
            } else {
                Technique::Raman
            };
            let with_ri = self.title.contains("retention index");
            let c = confidence_for(technique, &ScoreParams::default_for(technique), with_ri);
            let basis = match c.evidence {
                Evidence::Score => "on the best score",
                Evidence::Discriminant => "on the discriminant of Lam et al. 2007",
            };
            let derived = if c.retention_index {
                "the one for searches given a retention index, derived on this protocol's tuning part"
            } else {
                "derived on the real tuning parts"
            };
            println!(
                "Verdicts of the default scoring (`THRESHOLDS`: the weak threshold {:.2} {basis}, {derived}, last \
                 section; the close margin and strong score on generated spectra, `docs/evaluation.md`). Target: \
                 with the true identity withdrawn, at least 90 % *no acceptable match*; of the right first hits, at \
                 most 5 % called *no acceptable match*. The rows on wrong first hits (no target) show how \
                 often a wrong answer reaches the analyst flagged: called ambiguous with the right identity among \
                 the candidates named, or called no acceptable match{}.",
                c.weak_score,
                if v[0].twins_checked {
                    ", or with a `similar-references` warning naming the right identity (next section); the \
                     last row, what that warning costs on right first hits"
                } else {
                    ""
                }
            );
            println!();
            println!("| | tuning | reported |");
            println!("|---|---|---|");
            let row = |label: &str, count: fn(&Verdicts) -> (usize, usize)| {
                let [t, r] = [&v[0], &v[1]].map(|p| {
                    let (k, n) = count(p);
                    Verdicts::share(k, n)
                });
                println!("| {label} | {t} | {r} |");
            };
            row("right first hits called no acceptable match", |p| {
                (p.correct_no_match, p.correct)
            });
            row(
                "wrong first hits called ambiguous, the right identity named among the candidates",
                |p| (p.wrong_named, p.wrong),
            );
            row("wrong first hits called no acceptable match", |p| {
                (p.wrong_no_match, p.wrong)
            });
            if v[0].twins_checked {
                row(
                    "wrong first hits warning of similar references, the right identity named",
                    |p| (p.wrong_twin_named, p.wrong),
                );
                row("wrong first hits flagged in one of these three ways", |p| {
                    (p.wrong_flagged, p.wrong)
                });
                row("right first hits warning of similar references", |p| {
                    (p.right_twin_warned, p.correct)
                });
            }
            for w in WORDS {
                let k = |p: &Verdicts| p.absent_words.get(w).copied().unwrap_or(0);
                println!(
                    "| true identity withdrawn: {w} | {} | {} |",
                    Verdicts::share(k(&v[0]), v[0].absent),
                    Verdicts::share(k(&v[1]), v[1].absent)
                );
            }
            println!();
        }
        if let Some(extra) = &self.extra {
            println!("{extra}");
        }
    }
}
