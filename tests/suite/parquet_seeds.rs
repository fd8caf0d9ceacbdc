//! The seeds of the `price_parquet` fuzz target, `fuzz/seeds/price_parquet/`: small valid Parquet price
//! files, so that the fuzzer starts from files the reader accepts. Each is a slice of the bad-input
//! corpus's valid prices (`tests/fixtures/bad/_good/data/prices.csv`), written by polars' Parquet writer —
//! the library the ingest reads Parquet with — in the wide or the long layout, one of them with a missing
//! price. `parquet_seeds_read_like_their_csv` checks the committed files against that CSV;
//! `cargo test --test suite write_parquet_seeds -- --ignored` writes them again.

use chrono::NaiveDate;
use polars::prelude::*;
use std::path::{Path, PathBuf};
use tailpack::config::Layout;
use tailpack::ingest::prices::{PriceHistory, parse_prices};

/// One seed: its file name, layout, how many leading rows of `_good`'s prices it holds, the (row, asset)
/// cell it leaves blank, and its compression (varied, so the fuzzer meets more than one codec).
struct Seed {
    file: &'static str,
    layout: Layout,
    rows: usize,
    blank: Option<(usize, usize)>,
    compression: ParquetCompression,
}

fn seeds() -> [Seed; 3] {
    [
        Seed {
            file: "wide.parquet",
            layout: Layout::Wide,
            rows: 8,
            blank: None,
            compression: ParquetCompression::Snappy,
        },
        Seed {
            file: "long.parquet",
            layout: Layout::Long,
            rows: 4,
            blank: None,
            compression: ParquetCompression::Zstd(None),
        },
        Seed {
            file: "missing.parquet",
            layout: Layout::Wide,
            rows: 6,
            blank: Some((2, 1)),
            compression: ParquetCompression::Uncompressed,
        },
    ]
}

fn seed_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz/seeds/price_parquet")
}

/// A seed's prices read straight from the CSV text, without the ingest: ISO dates, the asset names of the
/// header, each cell a decimal number (`None` for the blanked one).
struct Slice {
    dates: Vec<String>,
    assets: Vec<String>,
    /// `values[asset][row]`.
    values: Vec<Vec<Option<f64>>>,
}

fn slice(seed: &Seed) -> Slice {
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/bad/_good/data/prices.csv");
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(header[0], "date");
    let rows: Vec<Vec<&str>> = lines
        .take(seed.rows)
        .map(|l| l.split(',').collect())
        .collect();
    assert_eq!(
        rows.len(),
        seed.rows,
        "_good has fewer rows than the seed takes"
    );
    let values = (1..header.len())
        .map(|c| {
            rows.iter()
                .enumerate()
                .map(|(r, cells)| {
                    (seed.blank != Some((r, c - 1))).then(|| cells[c].parse().unwrap())
                })
                .collect()
        })
        .collect();
    Slice {
        dates: rows.iter().map(|r| r[0].to_string()).collect(),
        assets: header[1..].iter().map(|a| a.to_string()).collect(),
        values,
    }
}

/// The slice as a table in the seed's layout: a `date` column, then one price column per asset (wide) or
/// `asset` and `price` columns with one row per date and asset (long).
fn frame(seed: &Seed, s: &Slice) -> DataFrame {
    let dates = |d: Vec<String>| Column::new("date".into(), d).cast(&DataType::Date).unwrap();
    let columns = match seed.layout {
        Layout::Long => {
            let cells = s.dates.iter().enumerate().flat_map(|(r, d)| {
                s.assets
                    .iter()
                    .zip(&s.values)
                    .map(move |(a, v)| (d.clone(), a.clone(), v[r]))
            });
            let (d, (a, p)): (Vec<String>, (Vec<String>, Vec<Option<f64>>)) =
                cells.map(|(d, a, p)| (d, (a, p))).unzip();
            vec![
                dates(d),
                Column::new("asset".into(), a),
                Column::new("price".into(), p),
            ]
        }
        _ => std::iter::once(dates(s.dates.clone()))
            .chain(
                s.assets
                    .iter()
                    .zip(&s.values)
                    .map(|(a, v)| Column::new(a.as_str().into(), v)),
            )
            .collect(),
    };
    DataFrame::new_infer_height(columns).unwrap()
}

/// Writes the seeds. Rerun after a change to `_good`'s prices or to `seeds()`, then commit the files.
#[test]
#[ignore = "writes fuzz/seeds/price_parquet/"]
fn write_parquet_seeds() {
    std::fs::create_dir_all(seed_dir()).unwrap();
    for seed in seeds() {
        let mut df = frame(&seed, &slice(&seed));
        let file = std::fs::File::create(seed_dir().join(seed.file)).unwrap();
        ParquetWriter::new(file)
            .with_compression(seed.compression)
            .finish(&mut df)
            .unwrap();
    }
}

#[test]
fn parquet_seeds_read_like_their_csv() {
    for seed in seeds() {
        let path = seed_dir().join(seed.file);
        let bytes = std::fs::read(&path).unwrap();
        assert!(
            bytes.len() < 4096,
            "{}: {} bytes, keep seeds small",
            seed.file,
            bytes.len()
        );
        let h: PriceHistory = parse_prices(&path, &bytes, Layout::Auto)
            .unwrap_or_else(|e| panic!("{}: {e}", seed.file));
        // Expected: the CSV slice of `_good`'s prices, read above by plain splitting and number parsing.
        let want = slice(&seed);
        let dates: Vec<NaiveDate> = want.dates.iter().map(|d| d.parse().unwrap()).collect();
        assert_eq!(h.layout, seed.layout, "{}: layout", seed.file);
        assert_eq!(h.dates, dates, "{}: dates", seed.file);
        assert_eq!(h.assets, want.assets, "{}: asset names", seed.file);
        assert_eq!(h.values, want.values, "{}: prices", seed.file);
    }
}

/// Every file in the seed folder is one of `seeds()`, so none escapes the check above.
#[test]
fn parquet_seed_folder_holds_only_checked_files() {
    let mut found: Vec<String> = std::fs::read_dir(seed_dir())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    found.sort();
    let mut listed: Vec<String> = seeds().iter().map(|s| s.file.to_string()).collect();
    listed.sort();
    assert_eq!(found, listed);
}
