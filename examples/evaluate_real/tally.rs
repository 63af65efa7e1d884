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

/// One protocol's table.
pub struct Table {
    pub title: &'static str,
    /// What is searched against what, and what counts as right.
    pub protocol: String,
    /// Source and licence of the data.
    pub source: &'static str,
    pub rows: Vec<Row>,
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
    }
}
