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
}

impl Verdicts {
    /// Counts one query: whether its first hit was right, the verdict on its list, and the
    /// verdict with the true identity withdrawn.
    /// Counts one query from the hits the protocol sees (best first), whether its first hit
    /// was right, and which hits are of the true identity.
    pub fn add_hits(
        &mut self,
        hits: Vec<whorl::search::Hit>,
        confidence: &whorl::search::Confidence,
        right_first: bool,
        is_truth: impl Fn(&whorl::search::Hit) -> bool,
    ) {
        use whorl::search::verdict;
        let on_list = verdict(&hits, confidence);
        let absent: Vec<_> = hits.into_iter().filter(|h| !is_truth(h)).collect();
        let without = verdict(&absent, confidence);
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
            println!(
                "Verdicts of the default scoring (thresholds of `THRESHOLDS`, derived on generated spectra;                  `docs/evaluation.md`). Target: with the true identity withdrawn, at least 90 % *no acceptable                  match*; of the right first hits, at most 5 % called *no acceptable match*."
            );
            println!();
            println!("| | tuning | reported |");
            println!("|---|---|---|");
            println!(
                "| right first hits called no acceptable match | {} | {} |",
                Verdicts::share(v[0].correct_no_match, v[0].correct),
                Verdicts::share(v[1].correct_no_match, v[1].correct)
            );
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
    }
}
