//! The bad-input corpus, `tests/fixtures/bad/`: one folder per input broken in one way, each beside the
//! valid small fund `_good/` it breaks, with an `expect.yaml` that says what is wrong (`what`) and what
//! tailpack must do: the documented exit code (README, "Exit codes"), and for an error a message naming the
//! file (`file`, relative to the case folder) and the place in it (`place`: line, row, column, byte or key),
//! plus further fragments (`says`). Cases that must run through say so (`exit: 0`) with the warnings they
//! must print (`stdout`), and `same_as_good` when their results must equal the valid fund's.
//!
//! Every case is run by the real binary, `tailpack run`, on a copy of its folder and `_good/` in a
//! temporary folder, and every case also checks: no panic, a short message (even for megabyte inputs), and
//! no pack folder — finished or partial — anywhere after an error. Inputs of megabytes and Parquet files
//! are generated here (`generate`) rather than committed.

use super::common::with_cell;
use serde::Deserialize;
use std::path::{Path, PathBuf};
use std::process::Command;

/// A case's `expect.yaml`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Expect {
    what: String,
    exit: i32,
    file: Option<String>,
    place: Option<String>,
    #[serde(default)]
    says: Vec<String>,
    #[serde(default)]
    stdout: Vec<String>,
    #[serde(default)]
    args: Vec<String>,
    /// `config` runs without `--out`, so the config's `output.root` is used (the output-folder cases).
    output: Option<String>,
    #[serde(default)]
    same_as_good: bool,
    generate: Option<String>,
}

/// Longest message an error may print: one line naming file, place and remedy, not the bad input itself.
const MAX_STDERR: usize = 1500;

fn corpus() -> PathBuf {
    super::common::repo().join("tests/fixtures/bad")
}

macro_rules! cases {
    ($($name:ident),* $(,)?) => {
        $(
            #[test]
            fn $name() {
                run_case(stringify!($name));
            }
        )*
        /// Every case with a test, for the check that no corpus folder goes untested.
        const CASES: &[&str] = &[$(stringify!($name)),*];
    };
}

cases!(
    prices_empty,
    prices_comments_only,
    prices_header_only,
    prices_byte_order_mark,
    prices_utf16,
    prices_latin1_byte,
    prices_semicolons,
    prices_tabs,
    prices_quoted_numbers,
    prices_thousands_separator,
    prices_decimal_comma,
    prices_non_numeric,
    prices_zero,
    prices_negative,
    prices_infinite,
    prices_overflowing_number,
    prices_subnormal,
    prices_overflowing_range,
    prices_huge_number,
    prices_tiny_then_huge,
    prices_largest_float,
    prices_ratio_beyond_range,
    prices_huge_in_unheld_asset,
    prices_long_huge_number,
    prices_huge_after_as_of,
    parquet_huge_number,
    prices_asset_code_tab,
    prices_long_asset_code_nul,
    prices_long_asset_code_next_line,
    parquet_asset_code_newline,
    prices_asset_codes_with_commas_and_quotes,
    prices_nan_na_and_blank_cells,
    prices_long_gap_in_held_asset,
    prices_duplicate_dates,
    prices_unsorted_dates,
    prices_mixed_date_formats,
    prices_unpadded_date,
    prices_impossible_date,
    prices_duplicate_asset_column,
    prices_empty_column_name,
    prices_no_date_column,
    prices_missing_header,
    prices_row_too_long,
    prices_row_too_short,
    prices_blank_line_inside,
    prices_trailing_blank_lines,
    prices_crlf_line_ends,
    prices_cr_line_ends,
    prices_unclosed_quote,
    prices_all_missing_column,
    prices_asset_missing_from_metadata,
    prices_benchmark_series_gap,
    config_policy_targets_sum_below_one,
    config_policy_target_outside_range,
    config_policy_active_budget_negative,
    config_policy_active_budget_without_benchmark,
    config_policy_line_selects_no_asset,
    config_policy_benchmark_not_in_prices,
    metadata_asset_missing_from_prices,
    prices_history_too_short,
    prices_long_duplicate_pair,
    prices_long_blank_asset,
    prices_huge_cell,
    prices_huge_header,
    parquet_wrong_column_types,
    parquet_text_date_column_garbage,
    parquet_date_outside_calendar,
    parquet_truncated,
    parquet_csv_in_disguise,
    parquet_footer_length_beyond_file,
    parquet_hand_written_plain,
    parquet_page_decoded_size_huge,
    parquet_page_stored_size_huge,
    parquet_row_count_huge,
    parquet_row_group_list_huge,
    parquet_value_count_huge,
    parquet_chunk_past_end,
    parquet_field_of_wrong_type,
    parquet_field_twice,
    parquet_fuzz_string_read_as_struct,
    parquet_fuzz_boolean_list,
    parquet_fuzz_boolean_list_slow,
    metadata_no_class_column,
    metadata_weight_above_one,
    metadata_min_above_max,
    metadata_duplicate_asset,
    holdings_sum_below_one,
    holdings_sum_just_outside_tolerance,
    holdings_sum_within_tolerance,
    holdings_negative_weight,
    holdings_unknown_asset,
    config_unknown_key,
    config_unknown_section,
    config_wrong_type,
    fx_unknown_currency,
    fx_missing_rate_on_as_of,
    fx_rate_zero,
    fx_long_rate_negative,
    fx_long_rate_not_a_number,
    fx_date_twice,
    fx_rate_jump_and_stale_run,
    assets_currency_not_a_code,
    config_hedge_ratio_above_one,
    config_hedge_unknown_asset,
    config_rate_differential_not_a_code,
    config_foreign_asset_without_base_currency,
    config_foreign_asset_without_rates,
    config_number_for_list,
    config_missing_required_key,
    config_confidence_zero,
    config_confidence_one,
    config_level_above_one,
    config_min_weights_sum_above_one,
    config_max_weights_sum_below_one,
    config_exclusions_leave_too_little,
    config_exclude_unknown_asset,
    config_geltner_rho_out_of_range,
    config_geltner_rho_without_treatment,
    config_geltner_rho_unknown_asset,
    config_frequency_unknown,
    config_group_unknown_asset,
    config_group_unknown_tag_column,
    config_turnover_without_holdings,
    config_base_currency_not_a_code,
    config_fund_value_without_currency,
    config_fund_value_negative,
    config_liabilities_without_fund_value,
    config_surplus_basis_without_liabilities,
    config_liability_proxy_is_an_asset,
    config_liability_proxy_not_in_prices,
    config_liability_tag_currency,
    config_skip_column_not_in_prices,
    config_skip_column_is_an_asset,
    config_skip_column_twice,
    assets_duration_out_of_range,
    config_cost_rate_negative,
    config_cost_unknown_asset,
    config_cost_unknown_class,
    config_as_of_after_data,
    config_as_of_before_data,
    config_holdings_file_missing,
    config_templates_folder_missing,
    config_templates_folder_without_templates,
    config_template_typst_error,
    config_template_escapes_folder,
    config_template_reads_absolute_path,
    config_template_imports_package,
    config_template_loops_forever,
    config_template_allocates_huge_range,
    config_typeset_seconds_zero,
    config_typeset_memory_mb_too_small,
    config_typeset_seconds_not_a_number,
    config_template_link_to_file_outside,
    config_template_link_to_folder_outside,
    config_template_link_to_system_file,
    config_template_link_to_itself,
    config_template_link_to_its_own_folder,
    config_template_dangling_link,
    config_template_named_pipe,
    config_horizon_out_of_range,
    config_horizon_negative,
    config_two_cap_forms,
    config_empty_file,
    config_tab_indentation,
    config_not_utf8,
    output_root_is_a_file,
    output_pack_folder_is_a_file,
    config_unknown_key_on_first_line,
    config_data_path_with_line_break,
    config_output_root_with_tab,
    config_unknown_key_after_byte_order_mark,
    config_unknown_key_nested_on_first_line,
    config_unknown_key_in_fund_list,
    config_unknown_key_too_long,
    config_fund_name_too_long,
    config_role_title_too_long,
    config_group_name_too_long,
    config_prepared_by_many_lines,
    config_long_value_in_fund_list,
    config_fifty_megabyte_value,
    config_group_blank_asset,
    config_group_tag_blank_value,
    config_exclude_blank,
    config_role_blank_title,
    config_prices_is_a_folder,
    config_holdings_is_dev_null,
    config_prices_is_dev_zero,
    config_assets_is_a_named_pipe,
    config_holdings_is_a_broken_symlink,
    config_prices_is_a_socket,
    metadata_blank_class,
    metadata_whitespace_class,
    metadata_monthly_asset_in_daily_scenarios,
    metadata_valuation_unknown,
    metadata_smoothing_unknown,
    metadata_name_too_long,
    metadata_tag_too_long,
    holdings_blank_asset,
    stress_broken_yaml,
    stress_duplicate_shock_name,
    stress_blank_shock_name,
    stress_description_too_long,
    stress_unknown_asset,
    stress_tag_matches_no_asset,
    stress_tag_blank_column,
    stress_return_below_minus_one,
    stress_unknown_key_on_first_line,
    stress_file_is_a_folder,
    stress_file_missing,
    stress_file_is_a_named_pipe,
    stress_fifty_megabyte_file,
    output_root_is_a_pack,
    output_root_inside_a_pack,
    scenarios_missing_column,
    scenarios_unknown_column,
    scenarios_non_numeric,
    scenarios_nan,
    scenarios_infinite,
    scenarios_total_loss,
    scenarios_negative_probability,
    scenarios_probabilities_not_one,
    scenarios_duplicate_label,
    scenarios_too_few,
    scenarios_empty,
    scenarios_header_only,
    scenarios_short_row,
    scenarios_parquet_wrong_types,
    scenarios_without_prices_or_as_of,
);

#[test]
fn every_corpus_folder_has_its_test_and_there_are_at_least_forty() {
    let mut folders: Vec<String> = std::fs::read_dir(corpus())
        .unwrap()
        .map(|e| e.unwrap())
        .filter(|e| e.file_type().unwrap().is_dir())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n != "_good" && n != "_snapshots")
        .collect();
    folders.sort();
    let mut listed: Vec<String> = CASES.iter().map(|s| s.to_string()).collect();
    listed.sort();
    // A pinned message whose case is gone would go unnoticed by the snapshot tool.
    for e in std::fs::read_dir(corpus().join("_snapshots")).unwrap() {
        let n = e.unwrap().file_name().to_string_lossy().into_owned();
        if n.ends_with(".snap.new") {
            continue; // a changed message awaiting review, reported by its own case
        }
        let case = n.strip_suffix(".snap").unwrap_or(&n);
        assert!(
            listed.iter().any(|c| c == case),
            "_snapshots/{n} pins the message of no listed case"
        );
    }
    assert_eq!(
        folders, listed,
        "every folder of tests/fixtures/bad needs a line in cases!(…) and the reverse"
    );
    assert!(
        listed.len() >= 40,
        "the issue asks for at least 40 cases, found {}",
        listed.len()
    );
}

#[test]
fn the_good_fund_the_cases_break_is_valid() {
    let dir = tempfile::tempdir().unwrap();
    super::common::copy_dir(&corpus().join("_good"), &dir.path().join("_good"));
    let ran = run(
        dir.path(),
        &["run", "_good/fund.yaml", "--quiet", "--out", "out"],
    );
    assert_eq!(ran.code, 0, "{}", ran.stderr);
    assert!(find(dir.path(), &|p| p.ends_with("results.json")).is_some());
}

/// What a run printed.
struct Ran {
    code: i32,
    stdout: String,
    stderr: String,
}

/// Longest a run of a corpus case may take before it counts as hanging (a named pipe opened for reading
/// waits for a writer forever): it is killed and the case fails.
const HANG: std::time::Duration = std::time::Duration::from_secs(300);

fn run(dir: &Path, args: &[&str]) -> Ran {
    let r = super::common::run_in(dir, args, HANG);
    Ran {
        code: r.code,
        stdout: r.stdout,
        stderr: r.stderr,
    }
}

/// A case copied beside `_good/` into a temporary folder, its generated inputs written.
struct Setup {
    tmp: tempfile::TempDir,
    expect: Expect,
    /// Fragments the message must contain: `says` and what the generator adds.
    needles: Vec<String>,
}

fn setup(name: &str) -> Setup {
    let text = std::fs::read_to_string(corpus().join(name).join("expect.yaml")).unwrap();
    let expect: Expect =
        serde_yaml_ng::from_str(&text).unwrap_or_else(|err| panic!("{name}/expect.yaml: {err}"));
    let tmp = tempfile::tempdir().unwrap();
    super::common::copy_dir(&corpus().join("_good"), &tmp.path().join("_good"));
    super::common::copy_dir(&corpus().join(name), &tmp.path().join(name));
    let mut needles: Vec<String> = expect.says.clone();
    if let Some(g) = &expect.generate {
        needles.extend(generate(g, &tmp.path().join(name)));
    }
    Setup {
        tmp,
        expect,
        needles,
    }
}

fn run_case(name: &str) {
    let Setup {
        tmp,
        expect: e,
        needles,
    } = setup(name);
    let root = tmp.path();
    let config = format!("{name}/fund.yaml");
    let mut args: Vec<&str> = vec!["run", &config, "--quiet"];
    if e.output.as_deref() != Some("config") {
        args.extend(["--out", "out"]);
    }
    args.extend(e.args.iter().map(String::as_str));
    let ran = run(root, &args);
    let shown = format!(
        "case {name} ({}):\nexit {}\nstdout: {}\nstderr: {}",
        e.what, ran.code, ran.stdout, ran.stderr
    );
    assert_eq!(ran.code, e.exit, "exit code; {shown}");
    assert!(
        !ran.stderr.contains("panicked") && !ran.stdout.contains("panicked"),
        "a panic; {shown}"
    );
    if e.exit == 0 {
        passed(name, &e, root, &ran, &shown);
    } else {
        failed(name, &e, root, &ran, &needles, &shown);
    }
}

/// Cases that `run` refuses only at or after solving, which `check` (it solves nothing and writes
/// nothing) cannot refuse, and why.
const REFUSED_AFTER_SOLVING: &[(&str, &str)] = &[
    (
        "config_template_typst_error",
        "custom templates are compiled when the PDF is rendered, from the solved results",
    ),
    (
        "config_template_escapes_folder",
        "paths in templates are resolved when the PDF is typeset",
    ),
    (
        "config_template_reads_absolute_path",
        "paths in templates are resolved when the PDF is typeset",
    ),
    (
        "config_template_imports_package",
        "imports in templates are resolved when the PDF is typeset",
    ),
    (
        "config_template_loops_forever",
        "the typesetting budget applies when the PDF is typeset",
    ),
    (
        "config_template_allocates_huge_range",
        "the typesetting budget applies when the PDF is typeset",
    ),
    (
        "output_pack_folder_is_a_file",
        "the finished pack is moved into place after solving; check builds no pack",
    ),
];

/// `check` runs the same steps as `run` up to its first LP, so every case `run` refuses before solving,
/// `check` refuses with the same exit code and a message naming the same file and place; every case
/// that runs through passes `check`.
#[test]
fn check_refuses_what_run_refuses_before_solving() {
    for (name, _) in REFUSED_AFTER_SOLVING {
        assert!(CASES.contains(name), "{name} is not a corpus case");
    }
    for name in CASES {
        if REFUSED_AFTER_SOLVING.iter().any(|(n, _)| n == name) {
            continue;
        }
        let Setup {
            tmp,
            expect: e,
            needles,
        } = setup(name);
        let config = format!("{name}/fund.yaml");
        let mut args: Vec<&str> = vec!["check", &config];
        for pair in e.args.chunks(2) {
            assert_eq!(
                pair[0], "--as-of",
                "{name}: check takes only --as-of of the run options"
            );
            args.extend(pair.iter().map(String::as_str));
        }
        let ran = run(tmp.path(), &args);
        let shown = format!(
            "check of case {name} ({}):\nexit {}\nstdout: {}\nstderr: {}",
            e.what,
            ran.code,
            &ran.stdout[..ran.stdout.len().min(2000)],
            ran.stderr
        );
        assert_eq!(ran.code, e.exit, "exit code; {shown}");
        if e.exit == 0 {
            assert!(ran.stdout.contains("is valid"), "{shown}");
            continue;
        }
        let file = format!("{name}/{}", e.file.as_ref().unwrap());
        for n in [&file, e.place.as_ref().unwrap()]
            .into_iter()
            .chain(&needles)
        {
            assert!(ran.stderr.contains(n.as_str()), "must say `{n}`; {shown}");
        }
        assert!(ran.stderr.len() <= MAX_STDERR, "{shown}");
    }
}

/// Pins the whole message, as a committee's administrator would read it, in
/// `tests/fixtures/bad/_snapshots/<case>.snap` (the temporary folder's path shown as `[case folder]`), so a
/// change of wording anywhere shows up in review. A new case's snapshot is written with `INSTA_UPDATE=always`
/// and read before it is committed (tests/fixtures/bad/README.md).
fn pin_message(name: &str, e: &Expect, root: &Path, stderr: &str) {
    let message = stderr.replace(&root.display().to_string(), "[case folder]");
    let mut settings = insta::Settings::clone_current();
    settings.set_snapshot_path("../fixtures/bad/_snapshots");
    settings.set_prepend_module_to_snapshot(false);
    settings.set_omit_expression(true);
    settings.set_description(e.what.clone());
    settings.bind(|| insta::assert_snapshot!(name.to_string(), message));
}

/// An error: file, place and fragments named, the message short, no pack anywhere.
fn failed(name: &str, e: &Expect, root: &Path, ran: &Ran, needles: &[String], shown: &str) {
    let file = e
        .file
        .as_ref()
        .unwrap_or_else(|| panic!("{name}: an error case must say which file the message names"));
    let place = e
        .place
        .as_ref()
        .unwrap_or_else(|| panic!("{name}: an error case must say which place the message names"));
    let file = format!("{name}/{file}");
    assert!(
        ran.stderr.contains(&file),
        "the message must name the file `{file}`; {shown}"
    );
    assert!(
        ran.stderr.contains(place.as_str()),
        "the message must name the place `{place}`; {shown}"
    );
    for n in needles {
        assert!(
            ran.stderr.contains(n.as_str()),
            "the message must say `{n}`; {shown}"
        );
    }
    assert!(
        ran.stderr.len() <= MAX_STDERR,
        "the message must stay short ({} bytes); {}",
        ran.stderr.len(),
        &shown[..shown.len().min(3000)]
    );
    pin_message(name, e, root, &ran.stderr);
    let pack = find(root, &|p| {
        let n = p
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        n.starts_with(".partial-") || n == "results.json" || n == "pack.pdf"
    });
    assert!(
        pack.is_none(),
        "no pack folder may exist after an error, found {:?}; {shown}",
        pack
    );
}

/// A run that must go through: its warnings printed, one pack written, and the valid fund's results where
/// the case only changes the form of the input.
fn passed(name: &str, e: &Expect, root: &Path, ran: &Ran, shown: &str) {
    for n in &e.stdout {
        assert!(
            ran.stdout.contains(n.as_str()),
            "stdout must say `{n}`; {shown}"
        );
    }
    let dir = PathBuf::from(
        ran.stdout
            .lines()
            .last()
            .expect("stdout names the pack folder"),
    );
    assert!(
        dir.join("results.json").is_file() && dir.join("pack.pdf").is_file(),
        "a complete pack; {shown}"
    );
    if e.same_as_good {
        let good = run(
            root,
            &["run", "_good/fund.yaml", "--quiet", "--out", "out-good"],
        );
        assert_eq!(good.code, 0, "{}", good.stderr);
        let gdir = PathBuf::from(good.stdout.lines().last().unwrap());
        let (a, b) = (
            super::common::json(&dir.join("results.json")),
            super::common::json(&gdir.join("results.json")),
        );
        for key in ["models", "current", "constraints"] {
            assert_eq!(
                a[key], b[key],
                "case {name}: results.json `{key}` must equal the valid fund's"
            );
        }
        assert_eq!(
            std::fs::read(dir.join("scenarios.csv")).unwrap(),
            std::fs::read(gdir.join("scenarios.csv")).unwrap(),
            "case {name}: the same scenarios"
        );
    }
}

/// Writes a generated input into the case folder; returns further fragments the message must contain.
fn generate(what: &str, dir: &Path) -> Vec<String> {
    let good = std::fs::read_to_string(corpus().join("_good/data/prices.csv")).unwrap();
    match what {
        "huge_cell" => {
            // 4 MB in the AS02 cell of data row 5 (file line 7): digits with one letter in the middle.
            let cell = format!("{}x{}", "1".repeat(2 << 20), "2".repeat(2 << 20));
            std::fs::write(dir.join("prices.csv"), with_cell(&good, 4, 2, &cell)).unwrap();
            vec![]
        }
        "huge_header" => {
            let names: Vec<String> = (0..300_000).map(|i| format!("AS{i:07}")).collect();
            let text = format!(
                "# generated: one header line of 3 MB\ndate,{}\n",
                names.join(",")
            );
            assert!(text.len() > 3_000_000);
            std::fs::write(dir.join("prices.csv"), text).unwrap();
            vec![]
        }
        "parquet_wrong_types" => {
            let (dates, cols) = good_columns(&good);
            let flags: Vec<bool> = cols[1].iter().map(|p| *p > 50.0).collect();
            write_parquet(
                &dir.join("prices.parquet"),
                date_column(&dates),
                vec![
                    ("AS01", Some(cols[0].clone()), None),
                    ("AS02", None, Some(flags)),
                    ("AS03", Some(cols[2].clone()), None),
                ],
            );
            vec![]
        }
        "scenarios_parquet_wrong_types" => {
            // The valid scenario file as Parquet, its AS02 returns replaced by true/false flags.
            use polars::prelude::*;
            let text = std::fs::read_to_string(corpus().join("_good/data/scenarios.csv")).unwrap();
            let rows: Vec<Vec<&str>> = text
                .lines()
                .filter(|l| !l.starts_with('#'))
                .skip(1)
                .map(|l| l.split(',').collect())
                .collect();
            let col =
                |c: usize| -> Vec<f64> { rows.iter().map(|r| r[c].parse().unwrap()).collect() };
            let labels: Vec<String> = rows.iter().map(|r| r[0].to_string()).collect();
            let flags: Vec<bool> = col(2).iter().map(|r| *r > 0.0).collect();
            let mut df = DataFrame::new_infer_height(vec![
                Column::new("scenario".into(), labels),
                Column::new("AS01".into(), col(1)),
                Column::new("AS02".into(), flags),
                Column::new("AS03".into(), col(3)),
            ])
            .unwrap();
            ParquetWriter::new(std::fs::File::create(dir.join("scenarios.parquet")).unwrap())
                .finish(&mut df)
                .unwrap();
            vec![]
        }
        "parquet_bad_date" => {
            let (mut dates, cols) = good_columns(&good);
            dates[2] = "03.01.2024".into();
            let date = polars::prelude::Column::new("date".into(), dates);
            write_parquet(
                &dir.join("prices.parquet"),
                date,
                vec![
                    ("AS01", Some(cols[0].clone()), None),
                    ("AS02", Some(cols[1].clone()), None),
                    ("AS03", Some(cols[2].clone()), None),
                ],
            );
            vec![]
        }
        "parquet_date_outside_calendar" => {
            // Regression case from fuzzing: polars' own Date-to-text cast panicked on such a value.
            use polars::prelude::*;
            let (dates, cols) = good_columns(&good);
            let mut days: Vec<i32> = date_column(&dates)
                .date()
                .unwrap()
                .physical()
                .iter()
                .map(Option::unwrap)
                .collect();
            days[2] = 2_000_000_000;
            let date = Column::new("date".into(), days)
                .cast(&DataType::Date)
                .unwrap();
            write_parquet(
                &dir.join("prices.parquet"),
                date,
                vec![
                    ("AS01", Some(cols[0].clone()), None),
                    ("AS02", Some(cols[1].clone()), None),
                    ("AS03", Some(cols[2].clone()), None),
                ],
            );
            vec![]
        }
        "parquet_huge_number" => {
            // 1e308 in AS01 on data row 7 (2024-01-09), as a Float64 (no text a CSV check could see).
            let (dates, mut cols) = good_columns(&good);
            cols[0][6] = 1e308;
            write_parquet(
                &dir.join("prices.parquet"),
                date_column(&dates),
                vec![
                    ("AS01", Some(cols[0].clone()), None),
                    ("AS02", Some(cols[1].clone()), None),
                    ("AS03", Some(cols[2].clone()), None),
                ],
            );
            vec![]
        }
        "parquet_asset_code_newline" => {
            let (dates, cols) = good_columns(&good);
            write_parquet(
                &dir.join("prices.parquet"),
                date_column(&dates),
                vec![
                    ("AS\n01", Some(cols[0].clone()), None),
                    ("AS02", Some(cols[1].clone()), None),
                    ("AS03", Some(cols[2].clone()), None),
                ],
            );
            vec![]
        }
        "parquet_truncated" => {
            let (dates, cols) = good_columns(&good);
            let path = dir.join("prices.parquet");
            write_parquet(
                &path,
                date_column(&dates),
                vec![
                    ("AS01", Some(cols[0].clone()), None),
                    ("AS02", Some(cols[1].clone()), None),
                    ("AS03", Some(cols[2].clone()), None),
                ],
            );
            let bytes = std::fs::read(&path).unwrap();
            let half = bytes.len() / 2;
            std::fs::write(&path, &bytes[..half]).unwrap();
            // The message names the byte where the closing marker `PAR1` should start.
            vec![format!("byte {}", half - 4), format!("it is {half} bytes")]
        }
        "parquet_footer_length" => {
            let path = dir.join("prices.parquet");
            write_good_parquet(&good, &path);
            let mut bytes = std::fs::read(&path).unwrap();
            let n = bytes.len();
            // The 4-byte little-endian metadata length just before the closing `PAR1` (Parquet format
            // specification, "File format") now claims 2 GiB − 1.
            bytes[n - 8..n - 4].copy_from_slice(&0x7fff_ffffu32.to_le_bytes());
            std::fs::write(&path, &bytes).unwrap();
            vec![
                format!("byte {}", n - 8),
                "2147483647 bytes of metadata".into(),
                format!("only {n} bytes"),
            ]
        }
        g if g.starts_with("parquet_hand_") => {
            use super::parquet_bytes::{Damage, write};
            let damage = match g {
                "parquet_hand_plain" => Damage::None,
                "parquet_hand_page_decoded_size" => Damage::PageDecodedSize,
                "parquet_hand_page_stored_size" => Damage::PageStoredSize,
                "parquet_hand_row_count" => Damage::RowCount,
                "parquet_hand_row_group_list" => Damage::RowGroupListLength,
                "parquet_hand_value_count" => Damage::ValueCount,
                "parquet_hand_chunk_past_end" => Damage::ChunkPastEnd,
                "parquet_hand_logical_type_as_list" => Damage::LogicalTypeAsList,
                "parquet_hand_row_count_twice" => Damage::RowCountTwice,
                other => panic!("unknown generator `{other}`"),
            };
            let (dates, cols) = good_columns(&good);
            let (bytes, at) = write(
                &dates,
                &[("AS01", &cols[0]), ("AS02", &cols[1]), ("AS03", &cols[2])],
                damage,
            );
            std::fs::write(dir.join("prices.parquet"), bytes).unwrap();
            if damage == Damage::None {
                vec![]
            } else {
                // The writer knows where it put the damaged record; the message must name that byte.
                vec![format!("byte {at}:")]
            }
        }
        "huge_config_value" => {
            // The case's config with a fund name of 50 MB.
            let path = dir.join("fund.yaml");
            let text = std::fs::read_to_string(&path).unwrap().replace(
                "name: Corpus Test Fund (fictional)",
                &format!("name: {}", "n".repeat(50 << 20)),
            );
            assert!(text.len() > 50 << 20);
            std::fs::write(path, text).unwrap();
            vec![]
        }
        "huge_stress_file" => {
            let text = format!(
                "shocks:\n  - name: Long\n    description: {}\n    moves: [{{ tag: \"class:equity\", return: -0.2 }}]\n",
                "d".repeat(50 << 20)
            );
            std::fs::write(dir.join("stress.yaml"), text).unwrap();
            vec![]
        }
        g if g.starts_with("fifo:") => {
            let made = Command::new("mkfifo")
                .arg(dir.join(&g["fifo:".len()..]))
                .status()
                .expect("mkfifo (coreutils) runs");
            assert!(made.success());
            vec![]
        }
        g if g.starts_with("socket:") => {
            // The socket file stays after the listener is dropped; nothing listens on it.
            std::os::unix::net::UnixListener::bind(dir.join(&g["socket:".len()..])).unwrap();
            vec![]
        }
        g if g.starts_with("dangling_symlink:") => {
            let link = dir.join(&g["dangling_symlink:".len()..]);
            std::os::unix::fs::symlink(dir.join("no-such-target.csv"), link).unwrap();
            vec![]
        }
        g if g.starts_with("symlink:") => {
            // `symlink:LINK -> TARGET`: LINK below the case folder, TARGET as written (relative to LINK's
            // folder, or absolute).
            let (link, target) = g["symlink:".len()..]
                .split_once(" -> ")
                .expect("symlink:LINK -> TARGET");
            let at = dir.join(link.trim());
            std::fs::create_dir_all(at.parent().unwrap()).unwrap();
            std::os::unix::fs::symlink(target.trim(), at).unwrap();
            vec![]
        }
        "fuzz_regression" => {
            // An input found by `cargo fuzz run price_parquet`, kept as it was found (fuzz/regressions/).
            let name = std::fs::read_to_string(dir.join("regression.txt")).unwrap();
            let from = super::common::repo()
                .join("fuzz/regressions/price_parquet")
                .join(name.trim());
            std::fs::copy(&from, dir.join("prices.parquet"))
                .unwrap_or_else(|e| panic!("{}: {e}", from.display()));
            vec![]
        }
        other => panic!("unknown generator `{other}`"),
    }
}

/// The valid fund's prices written as Parquet by polars.
fn write_good_parquet(good: &str, path: &Path) {
    let (dates, cols) = good_columns(good);
    write_parquet(
        path,
        date_column(&dates),
        vec![
            ("AS01", Some(cols[0].clone()), None),
            ("AS02", Some(cols[1].clone()), None),
            ("AS03", Some(cols[2].clone()), None),
        ],
    );
}

/// The valid fund's dates and its three price columns.
fn good_columns(text: &str) -> (Vec<String>, Vec<Vec<f64>>) {
    let rows: Vec<Vec<&str>> = text
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| l.split(',').collect())
        .collect();
    let dates = rows.iter().map(|r| r[0].to_string()).collect();
    let cols = (1..4)
        .map(|c| rows.iter().map(|r| r[c].parse().unwrap()).collect())
        .collect();
    (dates, cols)
}

fn date_column(dates: &[String]) -> polars::prelude::Column {
    use polars::prelude::*;
    Column::new("date".into(), dates.to_vec())
        .cast(&DataType::Date)
        .unwrap()
}

/// Writes a Parquet file: the date column, then each asset as Float64 or Boolean values.
fn write_parquet(
    path: &Path,
    date: polars::prelude::Column,
    assets: Vec<(&str, Option<Vec<f64>>, Option<Vec<bool>>)>,
) {
    use polars::prelude::*;
    let mut cols = vec![date];
    for (name, f, b) in assets {
        cols.push(match (f, b) {
            (Some(v), _) => Column::new(name.into(), v),
            (None, Some(v)) => Column::new(name.into(), v),
            _ => unreachable!(),
        });
    }
    let mut df = DataFrame::new_infer_height(cols).unwrap();
    ParquetWriter::new(std::fs::File::create(path).unwrap())
        .finish(&mut df)
        .unwrap();
}

/// The first path under `dir` (recursively) for which `hit` holds.
fn find(dir: &Path, hit: &dyn Fn(&Path) -> bool) -> Option<PathBuf> {
    for entry in std::fs::read_dir(dir).ok()? {
        let p = entry.ok()?.path();
        if hit(&p) {
            return Some(p);
        }
        if p.is_dir() {
            if let Some(found) = find(&p, hit) {
                return Some(found);
            }
        }
    }
    None
}
