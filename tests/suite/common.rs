//! Shared helpers: fixture folders with small synthetic markets, and a runner for the real binary.

use rand::{RngExt, SeedableRng};
use std::path::{Path, PathBuf};
use std::process::Command;

/// What a binary run returned.
pub struct Ran {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

/// A temporary folder holding a config and its data files.
pub struct Fixture {
    pub dir: tempfile::TempDir,
}

impl Fixture {
    pub fn new() -> Self {
        Fixture {
            dir: tempfile::tempdir().expect("tempdir"),
        }
    }

    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Writes a file (creating folders) and returns its path.
    pub fn write(&self, name: &str, text: &str) -> PathBuf {
        let p = self.path(name);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(&p, text).unwrap();
        p
    }

    /// Runs the tailpack binary with `args`, in the fixture folder.
    pub fn run(&self, args: &[&str]) -> Ran {
        let out = Command::new(env!("CARGO_BIN_EXE_tailpack"))
            .args(args)
            .current_dir(self.dir.path())
            .output()
            .expect("binary runs");
        let ran = Ran {
            code: out.status.code().unwrap_or(-1),
            stdout: String::from_utf8_lossy(&out.stdout).into(),
            stderr: String::from_utf8_lossy(&out.stderr).into(),
        };
        super::schema::check_written(self.dir.path(), args, &ran);
        ran
    }

    /// Runs the tailpack binary with `args` in the fixture folder, killing it and failing the test if it
    /// has not finished within `limit` (an input that makes it wait forever must not hang the suite).
    pub fn run_within(&self, args: &[&str], limit: std::time::Duration) -> Ran {
        run_in(self.dir.path(), args, limit)
    }

    /// A complete small fund: `market` prices, metadata, holdings, and a config with `extra` YAML appended
    /// under `limits:`-free top-level keys (caller supplies whole sections).
    pub fn small_fund(&self, market: &Market, config: &str) -> PathBuf {
        self.write("data/prices.csv", &market.wide_csv());
        self.write("data/assets.csv", &market.assets_csv());
        self.write("data/holdings.csv", &market.holdings_csv());
        self.write("fund.yaml", config)
    }

    /// Names of the visible entries of a folder (empty when it does not exist).
    pub fn entries(&self, rel: &str) -> Vec<String> {
        match std::fs::read_dir(self.path(rel)) {
            // Hidden entries (the archive lock) are not packs.
            Ok(rd) => rd
                .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
                .filter(|n| !n.starts_with('.'))
                .collect(),
            Err(_) => vec![],
        }
    }
}

/// Runs the tailpack binary with `args` in `dir`; kills it and panics when it has not finished within
/// `limit`. Output is read while it runs, so a long report cannot fill a pipe and stall it.
pub fn run_in(dir: &Path, args: &[&str], limit: std::time::Duration) -> Ran {
    use std::io::Read;
    let mut child = Command::new(env!("CARGO_BIN_EXE_tailpack"))
        .args(args)
        .current_dir(dir)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("binary runs");
    let drain = |mut r: Box<dyn Read + Send>| {
        std::thread::spawn(move || {
            let mut b = Vec::new();
            let _ = r.read_to_end(&mut b);
            String::from_utf8_lossy(&b).into_owned()
        })
    };
    let (out, err) = (
        drain(Box::new(child.stdout.take().expect("piped"))),
        drain(Box::new(child.stderr.take().expect("piped"))),
    );
    let start = std::time::Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().expect("wait") {
            break s;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            panic!("tailpack {args:?} did not finish within {limit:?}");
        }
        std::thread::sleep(std::time::Duration::from_millis(10));
    };
    let ran = Ran {
        code: status.code().unwrap_or(-1),
        stdout: out.join().expect("stdout"),
        stderr: err.join().expect("stderr"),
    };
    super::schema::check_written(dir, args, &ran);
    ran
}

/// A minimal config for [`Market`] fixtures; `tail` is appended verbatim.
pub fn config(tail: &str) -> String {
    format!(
        "fund:\n  name: Test Fund (fictional)\ndata:\n  prices: data/prices.csv\n  assets: data/assets.csv\n  holdings: data/holdings.csv\nscenarios:\n  horizon: 5\n  lookback_years: 2\noutput:\n  root: out\n{tail}"
    )
}

/// A synthetic market: business days, correlated random-walk prices, classes and holdings.
pub struct Market {
    pub dates: Vec<chrono::NaiveDate>,
    pub assets: Vec<String>,
    pub classes: Vec<String>,
    /// `prices[row][asset]`.
    pub prices: Vec<Vec<f64>>,
}

impl Market {
    /// `n` assets over business days from `start` to `end`, deterministic for `seed`; asset i has daily
    /// volatility 0.004 + 0.002·i and drift 0.0002 + 0.00005·i, classes alternate equity and bond.
    pub fn new(n: usize, start: &str, end: &str, seed: u64) -> Self {
        let classes = (0..n)
            .map(|i| {
                if i % 2 == 0 {
                    "equity".into()
                } else {
                    "bond".into()
                }
            })
            .collect();
        Self::generate(n, start, end, seed, classes, |i| {
            (0.004 + 0.002 * i as f64, 0.0002 + 0.00005 * i as f64)
        })
    }

    /// A broad universe of `n` assets whose volatility and drift cycle over ten levels (so prices stay
    /// positive however large `n` is), in five classes.
    pub fn broad(n: usize, start: &str, end: &str, seed: u64) -> Self {
        const CLASSES: [&str; 5] = ["equity", "government", "credit", "property", "cash"];
        let classes = (0..n).map(|i| CLASSES[i % 5].to_string()).collect();
        Self::generate(n, start, end, seed, classes, |i| {
            (
                0.003 + 0.001 * (i % 10) as f64,
                0.0001 + 0.00003 * (i % 10) as f64,
            )
        })
    }

    fn generate(
        n: usize,
        start: &str,
        end: &str,
        seed: u64,
        classes: Vec<String>,
        params: impl Fn(usize) -> (f64, f64),
    ) -> Self {
        let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
        let (mut d, end) = (
            start.parse::<chrono::NaiveDate>().unwrap(),
            end.parse::<chrono::NaiveDate>().unwrap(),
        );
        let mut dates = vec![];
        while d <= end {
            use chrono::Datelike;
            if d.weekday().num_days_from_monday() < 5 {
                dates.push(d);
            }
            d = d.succ_opt().unwrap();
        }
        let assets: Vec<String> = (0..n).map(|i| format!("AS{:02}", i + 1)).collect();
        let mut p = vec![100.0; n];
        let mut prices = Vec::with_capacity(dates.len());
        for _ in &dates {
            let common: f64 = normal(&mut rng);
            for i in 0..n {
                let (vol, drift) = params(i);
                let r = drift + vol * (0.5 * common + 0.85 * normal(&mut rng));
                p[i] *= 1.0 + r;
            }
            prices.push(p.clone());
        }
        Market {
            dates,
            assets,
            classes,
            prices,
        }
    }

    pub fn wide_csv(&self) -> String {
        let mut s = format!("date,{}\n", self.assets.join(","));
        for (d, row) in self.dates.iter().zip(&self.prices) {
            s.push_str(&d.to_string());
            for v in row {
                s.push_str(&format!(",{v:.6}"));
            }
            s.push('\n');
        }
        s
    }

    pub fn long_csv(&self) -> String {
        let mut s = String::from("date,asset,price\n");
        for (d, row) in self.dates.iter().zip(&self.prices) {
            for (a, v) in self.assets.iter().zip(row) {
                s.push_str(&format!("{d},{a},{v:.6}\n"));
            }
        }
        s
    }

    pub fn assets_csv(&self) -> String {
        let mut s = String::from("asset,class,max_weight\n");
        for (a, c) in self.assets.iter().zip(&self.classes) {
            s.push_str(&format!("{a},{c},0.6\n"));
        }
        s
    }

    pub fn holdings_csv(&self) -> String {
        let w = 1.0 / self.assets.len() as f64;
        let mut s = String::from("asset,weight\n");
        for a in &self.assets {
            s.push_str(&format!("{a},{w}\n"));
        }
        s
    }
}

/// Standard normal draw (Box–Muller).
pub fn normal(rng: &mut rand::rngs::StdRng) -> f64 {
    let u1: f64 = rng.random::<f64>().max(1e-300);
    let u2: f64 = rng.random::<f64>();
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

/// Reads and parses a JSON file.
pub fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// The repository root.
pub fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The text of a PDF as poppler's `pdftotext -layout` extracts it (an extractor outside the project).
pub fn pdf_text(pdf: &Path) -> String {
    let out = Command::new("pdftotext")
        .arg("-layout")
        .arg(pdf)
        .arg("-")
        .output()
        .expect("pdftotext (poppler-utils) is installed");
    assert!(
        out.status.success(),
        "pdftotext failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).expect("pdftotext prints UTF-8")
}

/// The page count of a PDF as poppler's `pdfinfo` reports it.
pub fn pdf_pages(pdf: &Path) -> usize {
    let out = Command::new("pdfinfo")
        .arg(pdf)
        .output()
        .expect("pdfinfo (poppler-utils) is installed");
    let text = String::from_utf8_lossy(&out.stdout);
    let line = text
        .lines()
        .find(|l| l.starts_with("Pages:"))
        .unwrap_or_else(|| panic!("pdfinfo printed no page count: {text}"));
    line["Pages:".len()..].trim().parse().expect("a page count")
}

/// Copies a folder tree (files and folders) to `to`.
pub fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            copy_dir(&entry.path(), &target);
        } else {
            std::fs::copy(entry.path(), target).unwrap();
        }
    }
}

/// Rewrites a plain CSV (no quoted fields; `#` comment lines, then a header line) with `edit(data row
/// index, cells)` applied to each data row; comments and header are kept, the text ends with a newline.
pub fn edit_csv_rows(text: &str, edit: impl Fn(usize, &mut Vec<String>)) -> String {
    let mut lines = text.lines().peekable();
    let mut out: Vec<String> = Vec::new();
    while let Some(comment) = lines.next_if(|l| l.starts_with('#')) {
        out.push(comment.to_string());
    }
    out.extend(lines.next().map(String::from));
    for (i, line) in lines.enumerate() {
        let mut cells: Vec<String> = line.split(',').map(String::from).collect();
        edit(i, &mut cells);
        out.push(cells.join(","));
    }
    out.join("\n") + "\n"
}

/// A plain CSV with the cell of data row `row` (0-based, after the header) and column `col` set to `value`.
pub fn with_cell(text: &str, row: usize, col: usize, value: &str) -> String {
    edit_csv_rows(text, |i, cells| {
        if i == row {
            cells[col] = value.to_string();
        }
    })
}

/// A pack's weights.csv as {column: {asset: weight}} (the label and class columns left out).
pub fn weights_csv(
    pack: &Path,
) -> std::collections::BTreeMap<String, std::collections::BTreeMap<String, f64>> {
    let text = std::fs::read_to_string(pack.join("weights.csv")).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let mut out: std::collections::BTreeMap<String, std::collections::BTreeMap<String, f64>> =
        Default::default();
    for line in lines {
        let cells: Vec<&str> = line.split(',').collect();
        for (j, col) in header.iter().enumerate().skip(2) {
            if let Ok(w) = cells[j].parse::<f64>() {
                out.entry(col.to_string())
                    .or_default()
                    .insert(cells[0].to_string(), w);
            }
        }
    }
    out
}

/// Text with every run of whitespace made one space (PDF text breaks lines where the page does).
pub fn squeeze(text: &str) -> String {
    text.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// Text with all whitespace removed, for phrases whose spacing the PDF's text extraction may change.
pub fn solid(text: &str) -> String {
    text.split_whitespace().collect()
}

/// Every portfolio of a pack, by name, in the order of `assets`: the current holdings of the four-asset
/// fixtures (0.25 each), then each model with weights.
pub fn portfolios(r: &serde_json::Value, assets: &[String]) -> Vec<(String, Vec<f64>)> {
    let mut out = vec![("current".to_string(), vec![0.25; 4])];
    for (name, m) in r["models"].as_object().unwrap() {
        if let Some(w) = m["weights"].as_object() {
            out.push((
                name.clone(),
                assets.iter().map(|a| w[a].as_f64().unwrap()).collect(),
            ));
        }
    }
    assert!(out.len() >= 3, "{}", r["models"]);
    out
}
