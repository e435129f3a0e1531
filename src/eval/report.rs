//! Evaluation reports a person wants to read: `report.json` (every figure and setting),
//! `report.md` (a table of systems × metrics, best per column marked) and `recall_at_k.svg`
//! (recall@k curves, k on a log axis, drawn with plotters), and the comparison of two
//! reports.
//!
//! Takes the metrics of each system and the settings of the run; gives files. It computes
//! no metric itself.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::Path;

use plotters::prelude::*;
use serde::{Deserialize, Serialize};

use super::SystemMetrics;

/// One column of the Markdown table: its title, how to read it from a system, and whether
/// higher is better.
type Column = (String, Box<dyn Fn(&SystemReport) -> f64>, bool);

/// Everything one evaluation measured.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Report {
    pub quarry_version: String,
    /// `statements` (theorem statements as goals) or `goal_states` (harvested displays).
    pub queries_from: String,
    pub split: String,
    pub holdout: f64,
    pub seed: u64,
    pub ks: Vec<usize>,
    pub depth: usize,
    pub library_roots: Vec<String>,
    pub build_id: String,
    pub counts: SplitCounts,
    pub seconds: BTreeMap<String, f64>,
    pub systems: Vec<SystemReport>,
    /// Settings of the signals (boosts, weights), as used.
    pub settings: BTreeMap<String, serde_json::Value>,
}

/// How many theorems fell on each side of the split.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct SplitCounts {
    pub eligible: usize,
    pub test: usize,
    pub validation: usize,
    pub train: usize,
    pub excluded: usize,
    pub queries: usize,
}

/// One system's figures, as written in the report.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct SystemReport {
    pub system: String,
    pub queries: usize,
    pub recall: BTreeMap<String, f64>,
    pub full_recall: BTreeMap<String, f64>,
    pub mrr: f64,
    pub ndcg_10: f64,
    pub latency_median_ms: f64,
    pub latency_p99_ms: f64,
}

impl From<&SystemMetrics> for SystemReport {
    fn from(m: &SystemMetrics) -> SystemReport {
        SystemReport {
            system: m.system.clone(),
            queries: m.queries,
            recall: m.recall.iter().map(|(k, v)| (k.to_string(), *v)).collect(),
            full_recall: m
                .full_recall
                .iter()
                .map(|(k, v)| (k.to_string(), *v))
                .collect(),
            mrr: m.mrr,
            ndcg_10: m.ndcg_10,
            latency_median_ms: m.latency_median_ms,
            latency_p99_ms: m.latency_p99_ms,
        }
    }
}

/// Why a report could not be written or read.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    #[error("`{path}`: {source}")]
    Io {
        path: String,
        #[source]
        source: std::io::Error,
    },
    #[error("`{path}` is not a quarry evaluation report: {message}")]
    NotAReport { path: String, message: String },
    #[error("drawing `{path}`: {message}")]
    Plot { path: String, message: String },
}

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> ReportError + '_ {
    move |source| ReportError::Io {
        path: path.display().to_string(),
        source,
    }
}

impl Report {
    /// Writes `report.json`, `report.md` and `recall_at_k.svg` into `dir` (created).
    pub fn write(&self, dir: &Path) -> Result<(), ReportError> {
        std::fs::create_dir_all(dir).map_err(io(dir))?;
        let json = dir.join("report.json");
        let text = serde_json::to_string_pretty(self).map_err(|e| ReportError::NotAReport {
            path: json.display().to_string(),
            message: e.to_string(),
        })?;
        std::fs::write(&json, text + "\n").map_err(io(&json))?;
        let md = dir.join("report.md");
        std::fs::write(&md, self.markdown()).map_err(io(&md))?;
        self.plot(&dir.join("recall_at_k.svg"))
    }

    /// Reads a `report.json`.
    pub fn read(path: &Path) -> Result<Report, ReportError> {
        let bytes = std::fs::read(path).map_err(io(path))?;
        serde_json::from_slice(&bytes).map_err(|e| ReportError::NotAReport {
            path: path.display().to_string(),
            message: e.to_string(),
        })
    }

    /// The table of systems × metrics, best per column in bold.
    pub fn markdown(&self) -> String {
        let mut out = String::new();
        let _ = writeln!(
            out,
            "# quarry evaluation: {} split, queries from {}\n",
            self.split, self.queries_from
        );
        let c = &self.counts;
        let _ = writeln!(
            out,
            "Theorems: {} eligible; {} held out ({} queried, {} excluded), {} validation, {} training. \
             Seed {}, holdout {}, index build `{}`.\n",
            c.eligible, c.test, c.queries, c.excluded, c.validation, c.train, self.seed, self.holdout, self.build_id
        );
        let mut columns: Vec<Column> = Vec::new();
        for k in &self.ks {
            let key = k.to_string();
            columns.push((
                format!("R@{k}"),
                Box::new(move |s: &SystemReport| s.recall.get(&key).copied().unwrap_or(0.0)),
                true,
            ));
        }
        for k in self.ks.iter().filter(|&&k| k == 10 || k == 100) {
            let key = k.to_string();
            columns.push((
                format!("full R@{k}"),
                Box::new(move |s: &SystemReport| s.full_recall.get(&key).copied().unwrap_or(0.0)),
                true,
            ));
        }
        columns.push(("MRR".into(), Box::new(|s: &SystemReport| s.mrr), true));
        columns.push((
            "nDCG@10".into(),
            Box::new(|s: &SystemReport| s.ndcg_10),
            true,
        ));
        columns.push((
            "median ms".into(),
            Box::new(|s: &SystemReport| s.latency_median_ms),
            false,
        ));
        columns.push((
            "p99 ms".into(),
            Box::new(|s: &SystemReport| s.latency_p99_ms),
            false,
        ));
        let _ = write!(out, "| system |");
        for (name, _, _) in &columns {
            let _ = write!(out, " {name} |");
        }
        let _ = write!(out, "\n|---|");
        for _ in &columns {
            let _ = write!(out, "---:|");
        }
        out.push('\n');
        let best: Vec<f64> = columns
            .iter()
            .map(|(_, f, higher)| {
                let vals = self.systems.iter().map(f);
                if *higher {
                    vals.fold(f64::NEG_INFINITY, f64::max)
                } else {
                    vals.fold(f64::INFINITY, f64::min)
                }
            })
            .collect();
        for s in &self.systems {
            let _ = write!(out, "| {} |", s.system);
            for ((name, f, _), b) in columns.iter().zip(&best) {
                let v = f(s);
                let cell = if name.ends_with("ms") {
                    format!("{v:.2}")
                } else {
                    format!("{:.1}", v * 100.0)
                };
                if (v - b).abs() < 1e-12 {
                    let _ = write!(out, " **{cell}** |");
                } else {
                    let _ = write!(out, " {cell} |");
                }
            }
            out.push('\n');
        }
        let _ = writeln!(
            out,
            "\nRecall, full recall, MRR and nDCG in percent; latency per query in milliseconds. \
             Best per column in bold."
        );
        out
    }

    /// Draws the recall@k curves.
    pub fn plot(&self, path: &Path) -> Result<(), ReportError> {
        let err = |e: String| ReportError::Plot {
            path: path.display().to_string(),
            message: e,
        };
        let kmax = self.ks.iter().copied().max().unwrap_or(100).max(2) as f64;
        let root = SVGBackend::new(path, (760, 480)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| err(e.to_string()))?;
        let caption = format!("recall@k, {} split ({})", self.split, self.queries_from);
        let mut chart = ChartBuilder::on(&root)
            .caption(caption, ("sans-serif", 20))
            .margin(16)
            .x_label_area_size(36)
            .y_label_area_size(48)
            .build_cartesian_2d((1f64..kmax).log_scale(), 0f64..1f64)
            .map_err(|e| err(e.to_string()))?;
        chart
            .configure_mesh()
            .x_desc("k (log scale)")
            .y_desc("recall@k")
            .draw()
            .map_err(|e| err(e.to_string()))?;
        let palette = [
            RGBColor(31, 119, 180),
            RGBColor(255, 127, 14),
            RGBColor(44, 160, 44),
            RGBColor(214, 39, 40),
            RGBColor(148, 103, 189),
            RGBColor(140, 86, 75),
            RGBColor(127, 127, 127),
        ];
        for (i, s) in self.systems.iter().enumerate() {
            let colour = palette[i % palette.len()];
            let points: Vec<(f64, f64)> = self
                .ks
                .iter()
                .map(|k| {
                    (
                        *k as f64,
                        s.recall.get(&k.to_string()).copied().unwrap_or(0.0),
                    )
                })
                .collect();
            chart
                .draw_series(LineSeries::new(points.clone(), colour.stroke_width(2)))
                .map_err(|e| err(e.to_string()))?
                .label(s.system.clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], colour.stroke_width(2))
                });
            chart
                .draw_series(
                    points
                        .into_iter()
                        .map(|p| Circle::new(p, 3, colour.filled())),
                )
                .map_err(|e| err(e.to_string()))?;
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK)
            .draw()
            .map_err(|e| err(e.to_string()))?;
        root.present().map_err(|e| err(e.to_string()))?;
        Ok(())
    }
}

/// The differences between two reports, system by system and metric by metric (B − A, in
/// percentage points for rates, milliseconds for latency).
pub fn compare(a: &Report, b: &Report) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "A: {} split, {} queries, build {}\nB: {} split, {} queries, build {}",
        a.split, a.counts.queries, a.build_id, b.split, b.counts.queries, b.build_id
    );
    if a.split != b.split || a.seed != b.seed || a.queries_from != b.queries_from {
        let _ = writeln!(
            out,
            "note: the reports differ in split, seed or queries; figures are not paired"
        );
    }
    for sb in &b.systems {
        let Some(sa) = a.systems.iter().find(|s| s.system == sb.system) else {
            let _ = writeln!(out, "{}: only in B", sb.system);
            continue;
        };
        let _ = writeln!(out, "{}:", sb.system);
        let mut keys: Vec<&String> = sb.recall.keys().collect();
        keys.sort_by_key(|k| k.parse::<usize>().unwrap_or(usize::MAX));
        for k in keys {
            let (va, vb) = (sa.recall.get(k).copied().unwrap_or(0.0), sb.recall[k]);
            let _ = writeln!(
                out,
                "  R@{k:<4} {:6.2} → {:6.2}  ({:+.2} points)",
                va * 100.0,
                vb * 100.0,
                (vb - va) * 100.0
            );
        }
        let _ = writeln!(
            out,
            "  MRR    {:6.2} → {:6.2}  ({:+.2} points)",
            sa.mrr * 100.0,
            sb.mrr * 100.0,
            (sb.mrr - sa.mrr) * 100.0
        );
        let _ = writeln!(
            out,
            "  nDCG@10 {:5.2} → {:6.2}  ({:+.2} points)",
            sa.ndcg_10 * 100.0,
            sb.ndcg_10 * 100.0,
            (sb.ndcg_10 - sa.ndcg_10) * 100.0
        );
        let _ = writeln!(
            out,
            "  median {:6.2} → {:6.2} ms  ({:+.2} ms)",
            sa.latency_median_ms,
            sb.latency_median_ms,
            sb.latency_median_ms - sa.latency_median_ms
        );
    }
    for sa in &a.systems {
        if !b.systems.iter().any(|s| s.system == sa.system) {
            let _ = writeln!(out, "{}: only in A", sa.system);
        }
    }
    out
}
