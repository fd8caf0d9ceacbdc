//! Invented demonstration data for tailpack.
//!
//! The demo configuration needs prices, an asset list and a current allocation
//! that behave like a real multi-asset fund's inputs, so that the `CVaR` pack,
//! the optimiser and the data-quality report all have something meaningful to
//! show an investment committee, without using (or resembling) any real firm,
//! index or security. Everything here is fictional and generated from a fixed
//! seed, so the files are byte-identical on every run and can be regenerated
//! rather than trusted blindly.
//!
//! The price model is a small factor model: global factors (equity, rates,
//! credit spread, inflation/commodity, property) plus regional equity factors,
//! Student-t shocks with four degrees of freedom, a calm/stressed Markov regime
//! that scales the common factors, and a few scripted episodes at fixed dates
//! (an equity crash with a flight to government bonds, its partial recovery,
//! and a rate-rise episode in which bonds and equities fall together). A real
//! feed's blemishes are planted on purpose: a few blank cells and one stale run.
//!
//! Two assets are valued monthly, as appraisal-valued funds are: a property fund and a private-markets
//! fund have a value only on each month's last business day (blank in between), and their values are
//! smoothed by construction (each month's reported return is a mix of the month's true return and the
//! previous reported one, the first-order model Geltner's unsmoothing inverts), so the pack's
//! unsmoothing has a known ρ to find. Their true paths come from a random stream of their own, so the
//! daily assets' prices do not depend on them.

use std::fmt::Write as _;
use std::path::Path;

use chrono::{Datelike, NaiveDate, Weekday};

use crate::csv_out;
use crate::random::Rng;

/// The seed behind every number in the demo files; changing it changes them all.
pub const DEMO_SEED: u64 = 0x7A11_9ACC_2014_1130;

/// What [`write_demo_data`] produced, for a one-line confirmation to the user.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DemoSummary {
    /// Number of asset columns in prices.csv (and rows in assets.csv).
    pub assets: usize,
    /// Number of price rows (business days).
    pub days: usize,
    /// First price date.
    pub first: NaiveDate,
    /// Last price date, a month-end.
    pub last: NaiveDate,
}

/// Writes prices.csv, assets.csv, holdings.csv and fx.csv into `dir` (created if missing).
///
/// # Errors
///
/// Any error from creating `dir` or writing one of the files.
pub fn write_demo_data(dir: &Path) -> std::io::Result<DemoSummary> {
    std::fs::create_dir_all(dir)?;
    for (name, contents) in render_demo_files() {
        std::fs::write(dir.join(name), contents)?;
    }
    let days = business_days();
    Ok(DemoSummary {
        assets: ASSETS.len(),
        days: days.len(),
        first: days[0],
        last: days[days.len() - 1],
    })
}

/// The demo files as (file name, contents), in the order they are written.
#[must_use]
pub fn render_demo_files() -> Vec<(&'static str, String)> {
    let dates = business_days();
    let clean = simulate_prices(&dates);
    let series = with_liability_proxy(benchmark_series(&clean), &clean);
    let rates = exchange_rates(&clean);
    let prices = apply_feed_defects(&dates, clean);
    vec![
        ("prices.csv", render_prices(&dates, &prices, &series)),
        ("assets.csv", render_assets()),
        ("holdings.csv", render_holdings()),
        ("fx.csv", render_rates(&dates, &rates)),
    ]
}

// ---------------------------------------------------------------------------
// Calendar
// ---------------------------------------------------------------------------

const FIRST_DAY: NaiveDate = ymd(2014, 1, 1);
/// A Monday, so the last month-end of the demo is itself a price date.
const LAST_DAY: NaiveDate = ymd(2026, 11, 30);
/// Weekdays per year: the feed has no holidays, so annualise by weekdays.
const DAYS_PER_YEAR: f64 = 261.0;

/// Lets the fixed dates below be checked at compile time.
const fn ymd(year: i32, month: u32, day: u32) -> NaiveDate {
    match NaiveDate::from_ymd_opt(year, month, day) {
        Some(date) => date,
        None => panic!("invalid constant date"),
    }
}

fn is_weekday(date: NaiveDate) -> bool {
    !matches!(date.weekday(), Weekday::Sat | Weekday::Sun)
}

/// Every Monday to Friday from `FIRST_DAY` to `LAST_DAY` inclusive.
fn business_days() -> Vec<NaiveDate> {
    FIRST_DAY
        .iter_days()
        .take_while(|d| *d <= LAST_DAY)
        .filter(|d| is_weekday(*d))
        .collect()
}

// ---------------------------------------------------------------------------
// The asset universe
// ---------------------------------------------------------------------------

/// Model behaviour of an asset; the file's `class` column is coarser.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    DevEquity,
    EmEquity,
    GovShort,
    GovLong,
    CreditIg,
    CreditHy,
    Linker,
    Property,
    Commodity,
    Cash,
}

const KINDS: usize = 10;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Region {
    North,
    West,
    East,
    Emerging,
    Global,
}

/// Weights are stored in units of 0.25%, so sums and caps are exact integers.
const UNITS_PER_WHOLE: u32 = 400;

struct AssetSpec {
    code: &'static str,
    name: &'static str,
    kind: Kind,
    region: Region,
    /// Per-asset maximum weight, in units of 0.25%.
    max_units: u32,
    /// Current holding, in units of 0.25%; 0 means not held.
    held_units: u32,
}

const fn asset(
    code: &'static str,
    name: &'static str,
    kind: Kind,
    region: Region,
    max_units: u32,
    held_units: u32,
) -> AssetSpec {
    AssetSpec {
        code,
        name,
        kind,
        region,
        max_units,
        held_units,
    }
}

use Kind::*;
use Region::*;

/// The 50 fictitious assets. Caps between 4% and 12% (cash 20%) force any
/// admissible portfolio to hold at least nine assets.
#[rustfmt::skip] // one asset per line reads as a table
const ASSETS: [AssetSpec; 50] = [
    asset("EQDV-01", "Developed Equity North 1", DevEquity, North, 32, 14),
    asset("EQDV-02", "Developed Equity North 2", DevEquity, North, 32, 12),
    asset("EQDV-03", "Developed Equity North 3", DevEquity, North, 32, 14),
    asset("EQDV-04", "Developed Equity North 4", DevEquity, North, 32, 12),
    asset("EQDV-05", "Developed Equity North 5", DevEquity, North, 32, 10),
    asset("EQDV-06", "Developed Equity West 1", DevEquity, West, 28, 16),
    asset("EQDV-07", "Developed Equity West 2", DevEquity, West, 28, 14),
    asset("EQDV-08", "Developed Equity West 3", DevEquity, West, 28, 12),
    asset("EQDV-09", "Developed Equity West 4", DevEquity, West, 28, 10),
    asset("EQDV-10", "Developed Equity West 5", DevEquity, West, 28, 8),
    asset("EQDV-11", "Developed Equity East 1", DevEquity, East, 24, 12),
    asset("EQDV-12", "Developed Equity East 2", DevEquity, East, 24, 10),
    asset("EQDV-13", "Developed Equity East 3", DevEquity, East, 24, 8),
    asset("EQDV-14", "Developed Equity East 4", DevEquity, East, 24, 6),
    asset("EQDV-15", "Developed Equity Global 1", DevEquity, Global, 32, 14),
    asset("EQDV-16", "Developed Equity Global 2", DevEquity, Global, 32, 10),
    asset("EQEM-01", "Emerging Equity 1", EmEquity, Emerging, 20, 10),
    asset("EQEM-02", "Emerging Equity 2", EmEquity, Emerging, 20, 8),
    asset("EQEM-03", "Emerging Equity 3", EmEquity, Emerging, 20, 6),
    asset("EQEM-04", "Emerging Equity 4", EmEquity, Emerging, 20, 6),
    asset("GOVS-01", "Government Short North 1", GovShort, North, 48, 12),
    asset("GOVS-02", "Government Short West 1", GovShort, West, 48, 10),
    asset("GOVS-03", "Government Short East 1", GovShort, East, 48, 6),
    asset("GOVS-04", "Government Short Global 1", GovShort, Global, 48, 0),
    asset("GOVL-01", "Government Long North 1", GovLong, North, 40, 16),
    asset("GOVL-02", "Government Long West 1", GovLong, West, 40, 12),
    asset("GOVL-03", "Government Long East 1", GovLong, East, 40, 8),
    asset("GOVL-04", "Government Long Global 1", GovLong, Global, 40, 0),
    asset("CRIG-01", "Investment Grade Credit North 1", CreditIg, North, 32, 10),
    asset("CRIG-02", "Investment Grade Credit West 1", CreditIg, West, 32, 8),
    asset("CRIG-03", "Investment Grade Credit East 1", CreditIg, East, 32, 6),
    asset("CRIG-04", "Investment Grade Credit Global 1", CreditIg, Global, 32, 6),
    asset("CRIG-05", "Investment Grade Credit Global 2", CreditIg, Global, 32, 0),
    asset("CRHY-01", "High Yield Credit North 1", CreditHy, North, 20, 6),
    asset("CRHY-02", "High Yield Credit West 1", CreditHy, West, 20, 4),
    asset("CRHY-03", "High Yield Credit Emerging 1", CreditHy, Emerging, 20, 0),
    asset("ILBD-01", "Inflation Linked North 1", Linker, North, 24, 8),
    asset("ILBD-02", "Inflation Linked West 1", Linker, West, 24, 6),
    asset("ILBD-03", "Inflation Linked East 1", Linker, East, 24, 2),
    asset("PROP-01", "Listed Property North 1", Property, North, 20, 6),
    asset("PROP-02", "Listed Property West 1", Property, West, 20, 4),
    asset("PROP-03", "Listed Property East 1", Property, East, 20, 8),
    asset("PROP-04", "Listed Property Global 1", Property, Global, 20, 6),
    asset("CMDY-01", "Commodity Energy 1", Commodity, Global, 16, 6),
    asset("CMDY-02", "Commodity Industrial Metals 1", Commodity, Global, 16, 4),
    asset("CMDY-03", "Commodity Precious Metals 1", Commodity, Global, 16, 4),
    asset("CMDY-04", "Commodity Agriculture 1", Commodity, Global, 16, 2),
    asset("CASH-01", "Cash Deposit 1", Cash, Global, 80, 12),
    // Valued monthly by appraisal (see APPRAISED): a value only at month-ends, smoothed.
    asset("PRFD-01", "Property Fund Monthly 1", Property, Global, 20, 8),
    asset("PRVM-01", "Private Markets Fund 1", DevEquity, Global, 20, 8),
];

/// Compile-time proof that the holdings add up to exactly 100% and that no
/// holding breaks its own cap: a broken table cannot even be built.
const fn holdings_are_consistent(assets: &[AssetSpec]) -> bool {
    let mut total = 0;
    let mut i = 0;
    while i < assets.len() {
        if assets[i].held_units > assets[i].max_units {
            return false;
        }
        total += assets[i].held_units;
        i += 1;
    }
    total == UNITS_PER_WHOLE
}

const _: () = assert!(holdings_are_consistent(&ASSETS));

impl Kind {
    fn class(self) -> &'static str {
        match self {
            DevEquity | EmEquity => "equity",
            GovShort | GovLong => "government",
            CreditIg | CreditHy => "credit",
            Linker => "inflation_linked",
            Property => "property",
            Commodity => "commodity",
            Cash => "cash",
        }
    }

    /// Annual arithmetic drift and annual volatility, before per-asset jitter.
    fn drift_and_vol(self) -> (f64, f64) {
        match self {
            DevEquity => (0.082, 0.170),
            EmEquity => (0.095, 0.190),
            GovShort => (0.020, 0.048),
            GovLong => (0.028, 0.068),
            CreditIg => (0.032, 0.060),
            CreditHy => (0.048, 0.085),
            Linker => (0.025, 0.065),
            Property => (0.065, 0.150),
            Commodity => (0.050, 0.210),
            Cash => (0.015, 0.002),
        }
    }

    /// Invented modified duration in years of the interest-rate assets (the `duration` column, for the
    /// liabilities' hedge ratio); none for the others.
    fn duration(self) -> Option<f64> {
        match self {
            GovShort => Some(2.5),
            GovLong => Some(13.0),
            CreditIg => Some(6.0),
            CreditHy => Some(3.5),
            Linker => Some(8.0),
            Cash => Some(0.2),
            DevEquity | EmEquity | Property | Commodity => None,
        }
    }

    /// Loadings on [equity, rates-up, spread-widening, inflation, property].
    /// Bonds load negatively on equity so they rally in ordinary sell-offs;
    /// equities' small negative rates loading is why a rate shock hurts both.
    fn global_loadings(self) -> [f64; GLOBAL_FACTORS] {
        match self {
            DevEquity => [0.80, -0.10, -0.15, 0.05, 0.0],
            EmEquity => [0.70, -0.05, -0.25, 0.15, 0.0],
            GovShort => [-0.15, -0.85, 0.0, 0.0, 0.0],
            GovLong => [-0.30, -0.90, 0.0, 0.0, 0.0],
            CreditIg => [0.15, -0.75, -0.45, 0.0, 0.0],
            CreditHy => [0.45, -0.25, -0.70, 0.0, 0.0],
            Linker => [-0.05, -0.75, 0.0, 0.40, 0.0],
            Property => [0.50, -0.30, 0.0, 0.0, 0.60],
            Commodity => [0.25, 0.0, 0.0, 0.70, 0.0],
            Cash => [0.0; GLOBAL_FACTORS],
        }
    }

    /// How much the asset shares its region's equity mood.
    fn regional_loading(self) -> f64 {
        match self {
            DevEquity => 0.35,
            EmEquity => 0.40,
            Property => 0.20,
            _ => 0.0,
        }
    }
}

impl Region {
    fn label(self) -> &'static str {
        match self {
            North => "north",
            West => "west",
            East => "east",
            Emerging => "emerging",
            Global => "global",
        }
    }

    /// Index of the regional factor; global assets have none.
    fn factor(self) -> Option<usize> {
        match self {
            North => Some(GLOBAL_FACTORS),
            West => Some(GLOBAL_FACTORS + 1),
            East => Some(GLOBAL_FACTORS + 2),
            Emerging => Some(GLOBAL_FACTORS + 3),
            Global => None,
        }
    }
}

// ---------------------------------------------------------------------------
// Scripted episodes
// ---------------------------------------------------------------------------

/// A fixed-date market event: each kind's total move over the window is
/// spread evenly over its business days, on top of the random path.
struct Episode {
    first: NaiveDate,
    last: NaiveDate,
    /// Forces the stressed regime, so the event also comes with high vol.
    stressed: bool,
    /// How strongly a rates-up shock drags the equity factor down during the
    /// window: in an inflation scare bonds stop hedging equities, and daily
    /// stock-bond correlation turns positive.
    rates_equity_link: f64,
    /// Total simple return per Kind, in Kind declaration order.
    moves: [f64; KINDS],
}

// Moves per Kind, in declaration order:
//       DevEq  EmEq   GovS    GovL   IG      HY     Linker Prop   Cmdty  Cash

/// A sharp equity crash with a flight to government bonds.
#[rustfmt::skip]
const CRASH: Episode = Episode {
    first: ymd(2019, 9, 2),
    last: ymd(2019, 10, 4),
    stressed: true,
    rates_equity_link: 0.0,
    moves: [-0.30, -0.34,  0.015,  0.05, -0.04,  -0.14,  0.01, -0.24, -0.22,  0.0],
};

/// The partial rebound after the crash; risk assets claw back about half.
#[rustfmt::skip]
const RECOVERY: Episode = Episode {
    first: ymd(2019, 10, 7),
    last: ymd(2020, 3, 31),
    stressed: false,
    rates_equity_link: 0.0,
    moves: [ 0.22,  0.25, -0.005, -0.02,  0.035,  0.11,  0.0,   0.16,  0.12,  0.0],
};

/// Rates rise for six months: bonds, credit, property and equities all fall.
#[rustfmt::skip]
const RATE_RISE: Episode = Episode {
    first: ymd(2023, 2, 1),
    last: ymd(2023, 7, 31),
    stressed: false,
    rates_equity_link: 0.6,
    moves: [-0.16, -0.18, -0.03,  -0.14, -0.09,  -0.08, -0.06, -0.20,  0.10,  0.0],
};

const EPISODES: [Episode; 3] = [CRASH, RECOVERY, RATE_RISE];

impl Episode {
    fn contains(&self, date: NaiveDate) -> bool {
        self.first <= date && date <= self.last
    }

    /// Daily log overlay per Kind, given the window's business-day count.
    fn daily_logs(&self, dates: &[NaiveDate]) -> [f64; KINDS] {
        let days = dates.iter().filter(|d| self.contains(**d)).count().max(1) as f64;
        self.moves.map(|m| (1.0 + m).ln() / days)
    }
}

/// Per day, the summed episode overlay for each Kind (zero outside episodes).
fn episode_overlays(dates: &[NaiveDate]) -> Vec<[f64; KINDS]> {
    let daily: Vec<[f64; KINDS]> = EPISODES.iter().map(|e| e.daily_logs(dates)).collect();
    dates
        .iter()
        .map(|date| {
            let mut total = [0.0; KINDS];
            for (episode, logs) in EPISODES.iter().zip(&daily) {
                if episode.contains(*date) {
                    total.iter_mut().zip(logs).for_each(|(t, l)| *t += l);
                }
            }
            total
        })
        .collect()
}

/// The episodes' combined log move per Kind; the drift gives it back so the
/// long-run return stays at the kind's target despite the scripted events.
fn episode_total_logs() -> [f64; KINDS] {
    let mut total = [0.0; KINDS];
    for episode in &EPISODES {
        total
            .iter_mut()
            .zip(episode.moves)
            .for_each(|(t, m)| *t += (1.0 + m).ln());
    }
    total
}

// ---------------------------------------------------------------------------
// Price simulation
// ---------------------------------------------------------------------------

const GLOBAL_FACTORS: usize = 5;
const EQUITY_FACTOR: usize = 0;
const RATES_FACTOR: usize = 1;
const FACTORS: usize = GLOBAL_FACTORS + 4;

/// Daily chance of a calm market turning stressed, and of a stress ending:
/// stress is entered about twice a year and lasts about three weeks.
const P_CALM_TO_STRESS: f64 = 0.008;
const P_STRESS_TO_CALM: f64 = 0.06;
/// Common-factor shocks are this much larger in stress than in calm, which
/// also raises cross-asset correlation in stress, as real markets do.
const STRESS_MULTIPLIER: f64 = 2.2;

/// Factor scale in calm markets, chosen so the long-run factor variance is 1
/// and each kind's volatility target holds on average across regimes.
fn calm_scale() -> f64 {
    let p_stressed = P_CALM_TO_STRESS / (P_CALM_TO_STRESS + P_STRESS_TO_CALM);
    let mean_square = 1.0 - p_stressed + p_stressed * STRESS_MULTIPLIER.powi(2);
    mean_square.sqrt().recip()
}

struct Regime {
    stressed: bool,
}

impl Regime {
    /// Advances one day and returns the factor scale for that day. The
    /// uniform is drawn even when an episode forces stress, so the random
    /// stream never depends on the episode calendar.
    fn step(&mut self, rng: &mut Rng, forced: bool) -> f64 {
        let u = rng.uniform();
        let switch = if self.stressed {
            u < P_STRESS_TO_CALM
        } else {
            u < P_CALM_TO_STRESS
        };
        // A switch flips the state; a forcing episode overrides it.
        self.stressed = forced || (self.stressed != switch);
        let scale = calm_scale();
        if self.stressed {
            scale * STRESS_MULTIPLIER
        } else {
            scale
        }
    }
}

struct AssetModel {
    kind: Kind,
    /// Daily log drift, net of the episodes' combined move.
    drift: f64,
    /// Daily volatility.
    sd: f64,
    loadings: [f64; FACTORS],
    /// Weight of the asset's own shock, so total unit variance is preserved.
    idio: f64,
    start: f64,
}

fn factor_loadings(spec: &AssetSpec) -> [f64; FACTORS] {
    let mut loadings = [0.0; FACTORS];
    loadings[..GLOBAL_FACTORS].copy_from_slice(&spec.kind.global_loadings());
    if let Some(i) = spec.region.factor() {
        loadings[i] = spec.kind.regional_loading();
    }
    loadings
}

/// Per-asset parameters; each asset gets its own vol (±8% of its kind's) and a
/// start price between 90 and 110, so the universe is not a row of clones.
fn build_models(rng: &mut Rng, return_days: usize) -> Vec<AssetModel> {
    let episode_logs = episode_total_logs();
    daily_assets()
        .map(|spec| {
            let (mu, vol) = spec.kind.drift_and_vol();
            let vol = vol * (0.92 + 0.16 * rng.uniform());
            let start = 90.0 + 20.0 * rng.uniform();
            let loadings = factor_loadings(spec);
            let common: f64 = loadings.iter().map(|b| b * b).sum();
            debug_assert!(common < 1.0, "{} over-loaded", spec.code);
            let episode_drift = episode_logs[spec.kind as usize] / return_days as f64;
            AssetModel {
                kind: spec.kind,
                drift: (mu - 0.5 * vol * vol) / DAYS_PER_YEAR - episode_drift,
                sd: vol / DAYS_PER_YEAR.sqrt(),
                loadings,
                idio: (1.0 - common).sqrt(),
                start,
            }
        })
        .collect()
}

/// Zero-mean, regime-scaled daily shocks in return units, per day and asset.
/// Row 0 is the start date and carries no return.
fn noise_paths(rng: &mut Rng, models: &[AssetModel], dates: &[NaiveDate]) -> Vec<Vec<f64>> {
    let mut regime = Regime { stressed: false };
    let mut paths = vec![vec![0.0; models.len()]];
    for date in &dates[1..] {
        let forced = EPISODES.iter().any(|e| e.stressed && e.contains(*date));
        let scale = regime.step(rng, forced);
        let mut factors: [f64; FACTORS] = std::array::from_fn(|_| rng.student_t4());
        couple_rates_to_equity(&mut factors, *date);
        let row = models
            .iter()
            .map(|m| {
                let common: f64 = m.loadings.iter().zip(&factors).map(|(b, f)| b * f).sum();
                m.sd * (scale * common + m.idio * rng.normal())
            })
            .collect();
        paths.push(row);
    }
    remove_sample_means(&mut paths);
    paths
}

/// Inside a rate-rise window, mixes the rates-up shock into the equity factor
/// with a negative sign, keeping the equity factor's unit variance.
fn couple_rates_to_equity(factors: &mut [f64; FACTORS], date: NaiveDate) {
    let link: f64 = EPISODES
        .iter()
        .filter(|e| e.contains(date))
        .map(|e| e.rates_equity_link)
        .sum();
    if link != 0.0 {
        let (equity, rates) = (factors[EQUITY_FACTOR], factors[RATES_FACTOR]);
        factors[EQUITY_FACTOR] = (1.0 - link * link).sqrt() * equity - link * rates;
    }
}

/// Pins each asset's noise to a zero sample mean (a bridge), so a lucky or
/// unlucky draw cannot leave, say, an equity with a 1% or 12% long-run return;
/// the realised drift is then the kind's target. Each daily move shifts by the
/// same tiny amount (a basis point or two), so the path keeps its shape.
fn remove_sample_means(paths: &mut [Vec<f64>]) {
    let days = (paths.len() - 1) as f64;
    for asset in 0..paths[0].len() {
        let mean = paths[1..].iter().map(|row| row[asset]).sum::<f64>() / days;
        paths[1..].iter_mut().for_each(|row| row[asset] -= mean);
    }
}

/// The assets priced every business day (all but the [`APPRAISED`] ones), in table order.
fn daily_assets() -> impl Iterator<Item = &'static AssetSpec> {
    ASSETS.iter().filter(|a| appraisal(a.code).is_none())
}

/// Clean prices per day and asset, in [`ASSETS`] order: the daily assets' simulated prices, and the
/// appraised assets' smoothed values at month-ends (NaN on other days).
fn simulate_prices(dates: &[NaiveDate]) -> Vec<Vec<f64>> {
    let daily = simulate_daily(dates);
    let appraised = appraised_values(dates, &daily);
    daily
        .iter()
        .enumerate()
        .map(|(day, row)| {
            let (mut d, mut a) = (row.iter(), appraised.iter());
            ASSETS
                .iter()
                .map(|spec| match appraisal(spec.code) {
                    None => *d.next().expect("one daily price per daily asset"),
                    Some(_) => a.next().expect("one column per appraised asset")[day],
                })
                .collect()
        })
        .collect()
}

/// Clean simulated prices of the daily assets, per day, before the feed defects.
fn simulate_daily(dates: &[NaiveDate]) -> Vec<Vec<f64>> {
    let mut rng = Rng::from_seed(DEMO_SEED);
    let models = build_models(&mut rng, dates.len() - 1);
    let noise = noise_paths(&mut rng, &models, dates);
    let overlays = episode_overlays(dates);
    let mut log_prices: Vec<f64> = models.iter().map(|m| m.start.ln()).collect();
    let mut prices = Vec::with_capacity(dates.len());
    for (day, shocks) in noise.iter().enumerate() {
        if day > 0 {
            for (i, m) in models.iter().enumerate() {
                log_prices[i] += m.drift + shocks[i] + overlays[day][m.kind as usize];
            }
        }
        prices.push(log_prices.iter().map(|l| l.exp()).collect());
    }
    prices
}

// ---------------------------------------------------------------------------
// Benchmark series: price-file columns without a metadata row (not investable)
// ---------------------------------------------------------------------------

/// Invented benchmark series of the demo policy: each follows the equally weighted daily return of one
/// class's assets plus a small tracking noise of its own, so the fund can track but never hold it.
const BENCHMARKS: [(&str, &str); 4] = [
    ("REF-EQUITY", "equity"),
    ("REF-GOVT", "government"),
    ("REF-CREDIT", "credit"),
    ("REF-CMDTY", "commodity"),
];

/// Daily standard deviation of a benchmark series' own noise (about 0.5% a year).
const BENCHMARK_NOISE: f64 = 0.0003;

/// Prices of the [`BENCHMARKS`] per day (starting at 100), from the clean asset prices and a generator of
/// their own, so the assets' prices do not depend on them.
fn benchmark_series(clean: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let mut rng = Rng::from_seed(DEMO_SEED ^ 0xBE4C_4A7C);
    let mut level = [100.0; BENCHMARKS.len()];
    let mut out = vec![level.to_vec()];
    for day in 1..clean.len() {
        for (b, (_, class)) in BENCHMARKS.iter().enumerate() {
            let members: Vec<usize> = (0..ASSETS.len())
                .filter(|&i| {
                    ASSETS[i].kind.class() == *class && appraisal(ASSETS[i].code).is_none()
                })
                .collect();
            let mean = members
                .iter()
                .map(|&i| clean[day][i] / clean[day - 1][i] - 1.0)
                .sum::<f64>()
                / members.len() as f64;
            level[b] *= 1.0 + mean + BENCHMARK_NOISE * rng.normal();
        }
        out.push(level.to_vec());
    }
    out
}

// ---------------------------------------------------------------------------
// Liability proxy: a price-file column the pension fund's liabilities track
// ---------------------------------------------------------------------------

/// The invented liability-matching series of the demo pension fund (`liabilities.proxy`): not investable,
/// no metadata row. Its daily return is the accrual at the liabilities' discount rate plus
/// [`LIABILITY_RATE_BETA`] times the long government bonds' rate-driven move (their equally weighted
/// daily return less its drift: the liabilities are longer than the bonds, so they move more when rates
/// move) plus a small noise of its own. Invented, like every series here.
const LIABILITY_PROXY: &str = "REF-LIAB";

/// Annual discount rate at which the liabilities' value accrues, as a fraction.
const LIABILITY_ACCRUAL: f64 = 0.035;

/// The liabilities' rate sensitivity relative to the long government bonds' (about 16 years' duration
/// against 13).
const LIABILITY_RATE_BETA: f64 = 1.2;

/// Daily standard deviation of the proxy's own noise (about 1% a year).
const LIABILITY_NOISE: f64 = 0.0006;

/// The benchmark series per day with the liability proxy's level (starting at 100) appended, from the
/// clean asset prices and a generator of its own.
fn with_liability_proxy(mut series: Vec<Vec<f64>>, clean: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let mut rng = Rng::from_seed(DEMO_SEED ^ 0x11AB_1E75);
    let long: Vec<usize> = (0..ASSETS.len())
        .filter(|&i| ASSETS[i].kind == GovLong)
        .collect();
    let bond_drift = GovLong.drift_and_vol().0 / DAYS_PER_YEAR;
    let mut level = 100.0;
    for (day, row) in series.iter_mut().enumerate() {
        if day > 0 {
            let bonds = long
                .iter()
                .map(|&i| clean[day][i] / clean[day - 1][i] - 1.0)
                .sum::<f64>()
                / long.len() as f64;
            level *= 1.0
                + LIABILITY_ACCRUAL / DAYS_PER_YEAR
                + LIABILITY_RATE_BETA * (bonds - bond_drift)
                + LIABILITY_NOISE * rng.normal();
        }
        row.push(level);
    }
    series
}

// ---------------------------------------------------------------------------
// Assets valued monthly by appraisal
// ---------------------------------------------------------------------------

/// An appraisal-valued asset: its true monthly return follows the equally weighted return of a class of
/// daily assets (`beta` times it, plus `drift` and a noise of its own), and the reported return mixes the
/// true one with the previous report, R*_t = (1 − ρ) R_t + ρ R*_{t−1} (the smoothing Geltner 1993 models).
struct Appraisal {
    code: &'static str,
    /// The daily assets' class the true value follows.
    follows: &'static str,
    beta: f64,
    /// Monthly drift and standard deviation of its own noise.
    drift: f64,
    noise: f64,
    rho: f64,
}

/// The demo's two appraisal-valued assets.
#[rustfmt::skip] // one asset per line reads as a table
const APPRAISED: [Appraisal; 2] = [
    Appraisal { code: "PRFD-01", follows: "property", beta: 0.6, drift: 0.002, noise: 0.012, rho: 0.6 },
    Appraisal { code: "PRVM-01", follows: "equity", beta: 0.9, drift: 0.003, noise: 0.02, rho: 0.5 },
];

fn appraisal(code: &str) -> Option<&'static Appraisal> {
    APPRAISED.iter().find(|a| a.code == code)
}

/// The last business day of each month of `dates`.
fn month_ends(dates: &[NaiveDate]) -> Vec<usize> {
    (0..dates.len())
        .filter(|&i| i + 1 == dates.len() || dates[i + 1].month() != dates[i].month())
        .collect()
}

/// Per appraised asset (in [`APPRAISED`] order), its values per day: smoothed, starting at 100 on the
/// first month-end, NaN on every other day. `daily` holds the daily assets' clean prices.
fn appraised_values(dates: &[NaiveDate], daily: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let mut rng = Rng::from_seed(DEMO_SEED ^ 0xA99A_15ED);
    let ends = month_ends(dates);
    APPRAISED
        .iter()
        .map(|p| {
            let members: Vec<usize> = daily_assets()
                .enumerate()
                .filter(|(_, a)| a.kind.class() == p.follows)
                .map(|(i, _)| i)
                .collect();
            let mut values = vec![f64::NAN; dates.len()];
            let (mut level, mut reported) = (100.0, 0.0);
            values[ends[0]] = level;
            for w in ends.windows(2) {
                let class = members
                    .iter()
                    .map(|&i| daily[w[1]][i] / daily[w[0]][i] - 1.0)
                    .sum::<f64>()
                    / members.len() as f64;
                let truth = p.drift + p.beta * class + p.noise * rng.normal();
                reported = (1.0 - p.rho) * truth + p.rho * reported;
                level *= 1.0 + reported;
                values[w[1]] = level;
            }
            values
        })
        .collect()
}

// ---------------------------------------------------------------------------
// Exchange rates: two invented currencies against the invented base currency
// ---------------------------------------------------------------------------

/// The demo's foreign currencies, codes from ISO 4217's user-assigned range (no real currency), each with
/// its region, its rate on the first day (value of one unit in the base currency), its annual volatility
/// and its daily beta to developed equity: `QMV` firms when equities fall (a haven), `QRD` weakens.
const CURRENCIES: [(&str, Region, f64, f64, f64); 2] = [
    ("QMV", West, 1.3500, 0.075, -0.12),
    ("QRD", East, 0.0820, 0.095, 0.18),
];

/// The currency of an asset of `region`: West assets are priced in `QMV`, East ones in `QRD`, the rest in
/// the base currency (blank).
fn currency_of(region: Region) -> &'static str {
    CURRENCIES
        .iter()
        .find(|c| c.1 == region)
        .map_or("", |c| c.0)
}

/// The days the rate feed has no quote (its own holidays): the prices' calendar and the rates' differ,
/// and the run takes the latest earlier rate.
fn rate_holiday(date: NaiveDate) -> bool {
    (date.month() == 12 && date.day() == 26) || (date.month() == 1 && date.day() == 2)
}

/// Rates per day and currency: a random walk with a beta to the first developed-equity asset's daily
/// return, from a generator of its own (the asset prices do not depend on it).
fn exchange_rates(clean: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let mut rng = Rng::from_seed(DEMO_SEED ^ 0x0F0E_C0DE);
    let mut level: Vec<f64> = CURRENCIES.iter().map(|c| c.2).collect();
    let mut out = vec![level.clone()];
    for day in 1..clean.len() {
        let equity = clean[day][0] / clean[day - 1][0] - 1.0;
        for (k, &(_, _, _, vol, beta)) in CURRENCIES.iter().enumerate() {
            let own = vol / DAYS_PER_YEAR.sqrt() * rng.normal();
            level[k] *= 1.0 + beta * equity + own;
        }
        out.push(level.clone());
    }
    out
}

fn render_rates(dates: &[NaiveDate], rates: &[Vec<f64>]) -> String {
    let mut out = synthetic_header(
        "invented currencies (user-assigned codes): value of one unit in the base currency XTS",
    );
    out.push_str("date");
    for c in CURRENCIES {
        write!(out, ",{}", c.0).expect("write to String");
    }
    out.push('\n');
    for (date, row) in dates.iter().zip(rates) {
        if rate_holiday(*date) {
            continue;
        }
        write!(out, "{date}").expect("write to String");
        for r in row {
            write!(out, ",{r:.6}").expect("write to String");
        }
        out.push('\n');
    }
    out
}

// ---------------------------------------------------------------------------
// Planted data-quality defects: the report should flag them, the run should not stop.
// ---------------------------------------------------------------------------

/// Isolated missing prices, at most two in a row, away from the first and
/// last rows and from the scripted episodes.
const BLANK_CELLS: [(&str, NaiveDate); 4] = [
    ("EQDV-07", ymd(2016, 5, 17)),
    ("CRHY-02", ymd(2020, 11, 12)),
    ("CRHY-02", ymd(2020, 11, 13)),
    ("PROP-03", ymd(2024, 12, 24)),
];

/// A feed that stopped updating: the price on `STALE_FIRST` is repeated for
/// `STALE_LEN` rows in total, then the true path resumes with a catch-up jump.
const STALE_ASSET: &str = "CRIG-03";
const STALE_FIRST: NaiveDate = ymd(2021, 6, 14);
const STALE_LEN: usize = 12;

fn asset_index(code: &str) -> usize {
    ASSETS
        .iter()
        .position(|a| a.code == code)
        .expect("planted defect names a known asset")
}

fn date_index(dates: &[NaiveDate], date: NaiveDate) -> usize {
    dates
        .binary_search(&date)
        .expect("planted defect falls on a business day")
}

fn apply_feed_defects(dates: &[NaiveDate], clean: Vec<Vec<f64>>) -> Vec<Vec<Option<f64>>> {
    let mut prices: Vec<Vec<Option<f64>>> = clean
        .into_iter()
        .map(|row| {
            row.into_iter()
                .map(|p| p.is_finite().then_some(p))
                .collect()
        })
        .collect();
    let stale = asset_index(STALE_ASSET);
    let first = date_index(dates, STALE_FIRST);
    let frozen = prices[first][stale];
    for row in &mut prices[first + 1..first + STALE_LEN] {
        row[stale] = frozen;
    }
    for (code, date) in BLANK_CELLS {
        prices[date_index(dates, date)][asset_index(code)] = None;
    }
    prices
}

// ---------------------------------------------------------------------------
// Rendering
// ---------------------------------------------------------------------------

/// The first line of every file, so nobody mistakes the demo for real data.
fn synthetic_header(what: &str) -> String {
    format!(
        "# SYNTHETIC DEMO DATA - invented by tailpack's deterministic generator \
         (seed {DEMO_SEED:#018x}); {what}\n"
    )
}

fn render_prices(dates: &[NaiveDate], prices: &[Vec<Option<f64>>], series: &[Vec<f64>]) -> String {
    let mut out = synthetic_header("not real market prices");
    out.push_str("date");
    let codes = ASSETS.iter().map(|a| a.code);
    let series_codes = BENCHMARKS.iter().map(|b| b.0).chain([LIABILITY_PROXY]);
    for code in codes.chain(series_codes) {
        write!(out, ",{}", csv_out::field(code)).expect("write to String");
    }
    out.push('\n');
    for ((date, row), bench) in dates.iter().zip(prices).zip(series) {
        write!(out, "{date}").expect("write to String");
        for price in row {
            match price {
                Some(p) => write!(out, ",{p:.4}").expect("write to String"),
                None => out.push(','),
            }
        }
        for p in bench {
            write!(out, ",{p:.4}").expect("write to String");
        }
        out.push('\n');
    }
    out
}

/// A weight in units of 0.25% as an exact decimal string, e.g. 18 -> "0.0450".
fn weight_text(units: u32) -> String {
    let basis_points = units * (10_000 / UNITS_PER_WHOLE);
    format!("{}.{:04}", basis_points / 10_000, basis_points % 10_000)
}

fn render_assets() -> String {
    let mut out = synthetic_header("fictitious assets, not real securities");
    out.push_str(
        "asset,name,class,region,min_weight,max_weight,valuation,smoothing,currency,duration\n",
    );
    for a in &ASSETS {
        let (class, region) = (a.kind.class(), a.region.label());
        let max = weight_text(a.max_units);
        let text = csv_out::row([a.code, a.name, class, region]);
        let valued = match appraisal(a.code) {
            Some(_) => "monthly,geltner",
            None => "daily,",
        };
        let currency = currency_of(a.region);
        let duration = a
            .kind
            .duration()
            .map_or(String::new(), |d| format!("{d:.1}"));
        writeln!(out, "{text},0,{max},{valued},{currency},{duration}").expect("write to String");
    }
    out
}

fn render_holdings() -> String {
    let mut out = synthetic_header("an invented demonstration fund, not a real portfolio");
    out.push_str("asset,weight\n");
    for a in ASSETS.iter().filter(|a| a.held_units > 0) {
        let code = csv_out::field(a.code);
        writeln!(out, "{code},{}", weight_text(a.held_units)).expect("write to String");
    }
    out
}

// ---------------------------------------------------------------------------
// Tests
// ---------------------------------------------------------------------------

#[cfg(test)]
mod tests {
    use super::*;

    struct Prices {
        codes: Vec<String>,
        dates: Vec<NaiveDate>,
        /// [day][asset]
        cells: Vec<Vec<Option<f64>>>,
    }

    fn file(name: &str) -> String {
        render_demo_files()
            .into_iter()
            .find(|(n, _)| *n == name)
            .expect("file rendered")
            .1
    }

    /// Data lines of a CSV after the comment line and the header.
    fn rows(contents: &str) -> Vec<Vec<&str>> {
        contents
            .lines()
            .skip(2)
            .map(|l| l.split(',').collect())
            .collect()
    }

    fn parse_prices() -> Prices {
        let text = file("prices.csv");
        let header = text.lines().nth(1).expect("header");
        let codes = header.split(',').skip(1).map(String::from).collect();
        let (mut dates, mut cells) = (Vec::new(), Vec::new());
        for row in rows(&text) {
            dates.push(row[0].parse().expect("ISO date"));
            let parse = |c: &&str| (!c.is_empty()).then(|| c.parse::<f64>().expect("price"));
            cells.push(row[1..].iter().map(parse).collect());
        }
        Prices {
            codes,
            dates,
            cells,
        }
    }

    impl Prices {
        fn column(&self, code: &str) -> Vec<Option<f64>> {
            let i = self
                .codes
                .iter()
                .position(|c| c == code)
                .expect("known code");
            self.cells.iter().map(|row| row[i]).collect()
        }

        fn row_of(&self, date: NaiveDate) -> usize {
            self.dates.binary_search(&date).expect("business day")
        }

        /// Equal-weighted index of one class's assets, rebased to 1 at `base`.
        fn class_index(
            &self,
            class: &str,
            base: usize,
            days: std::ops::RangeInclusive<usize>,
        ) -> Vec<f64> {
            let members: Vec<&AssetSpec> =
                daily_assets().filter(|a| a.kind.class() == class).collect();
            let level = |day: usize| {
                let ratio = |a: &&AssetSpec| {
                    let col = self.column(a.code);
                    col[day].expect("no blanks here") / col[base].expect("no blanks here")
                };
                members.iter().map(ratio).sum::<f64>() / members.len() as f64
            };
            days.map(level).collect()
        }
    }

    fn annual_vol(column: &[Option<f64>]) -> f64 {
        let returns: Vec<f64> = column
            .windows(2)
            .filter_map(|w| Some((w[1]? / w[0]?).ln()))
            .collect();
        let n = returns.len() as f64;
        let mean = returns.iter().sum::<f64>() / n;
        let var = returns.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (n - 1.0);
        (var * DAYS_PER_YEAR).sqrt()
    }

    #[test]
    fn rendering_is_deterministic() {
        assert_eq!(render_demo_files(), render_demo_files());
    }

    #[test]
    fn every_file_says_it_is_synthetic_and_ends_with_a_newline() {
        for (name, contents) in render_demo_files() {
            assert!(contents.starts_with("# SYNTHETIC DEMO DATA"), "{name}");
            assert!(
                contents.ends_with('\n') && !contents.contains('\r'),
                "{name}"
            );
        }
    }

    #[test]
    fn calendar_is_every_weekday_up_to_the_last_month_end() {
        let p = parse_prices();
        // 50 assets, then the 4 benchmark series and the liability proxy the asset metadata does not list.
        assert_eq!(p.codes.len(), 55);
        let assets = file("assets.csv");
        for code in BENCHMARKS.iter().map(|b| b.0).chain([LIABILITY_PROXY]) {
            assert!(p.codes.contains(&code.to_string()), "{code}");
            assert!(!assets.contains(code), "{code} must have no metadata row");
        }
        assert_eq!(p.dates.first(), Some(&ymd(2014, 1, 1)));
        assert_eq!(p.dates.last(), Some(&ymd(2026, 11, 30)));
        assert!(p.dates.iter().all(|d| is_weekday(*d)));
        assert!(
            p.dates
                .windows(2)
                .all(|w| w[0] < w[1] && (w[1] - w[0]).num_days() <= 3)
        );
        assert!(p.cells.iter().all(|row| row.len() == 55));
    }

    #[test]
    fn prices_are_positive_and_only_the_planted_cells_are_blank() {
        let p = parse_prices();
        let mut blanks = Vec::new();
        for (day, row) in p.cells.iter().enumerate() {
            for (i, cell) in row.iter().enumerate() {
                match cell {
                    Some(price) => assert!(*price > 0.0),
                    None if appraisal(&p.codes[i]).is_some() => {}
                    None => blanks.push((p.codes[i].as_str(), p.dates[day])),
                }
            }
        }
        blanks.sort();
        let mut planted = BLANK_CELLS.to_vec();
        planted.sort();
        assert_eq!(blanks, planted);
    }

    #[test]
    fn only_the_planted_asset_has_a_stale_run() {
        let p = parse_prices();
        for code in &p.codes {
            let column = p.column(code);
            let mut longest = 1;
            let mut run = 1;
            for w in column.windows(2) {
                run = if w[0].is_some() && w[0] == w[1] {
                    run + 1
                } else {
                    1
                };
                longest = longest.max(run);
            }
            // Cash moves by a few thousandths a day, so a rare pair may round equal.
            let ok = if code == STALE_ASSET {
                longest == STALE_LEN
            } else {
                longest <= 2
            };
            assert!(ok, "{code}: longest run of equal prices is {longest}");
        }
    }

    #[test]
    fn appraised_assets_have_values_only_at_month_ends_smoothed_by_their_rho() {
        let p = parse_prices();
        let ends = month_ends(&p.dates);
        for a in &APPRAISED {
            let column = p.column(a.code);
            for (day, cell) in column.iter().enumerate() {
                assert_eq!(
                    cell.is_some(),
                    ends.contains(&day),
                    "{} on {}",
                    a.code,
                    p.dates[day]
                );
            }
            // The reported monthly returns are a first-order smoothing with coefficient ρ, so their
            // first-order autocorrelation is about ρ (Geltner 1993); the sample of 154 months is within
            // ±0.25 of it (about three standard errors √((1 − ρ²)/n), Bartlett 1946).
            let values: Vec<f64> = column.into_iter().flatten().collect();
            let r: Vec<f64> = values.windows(2).map(|w| w[1] / w[0] - 1.0).collect();
            let mean = r.iter().sum::<f64>() / r.len() as f64;
            let den: f64 = r.iter().map(|x| (x - mean).powi(2)).sum();
            let num: f64 = r.windows(2).map(|w| (w[1] - mean) * (w[0] - mean)).sum();
            assert!(
                (num / den - a.rho).abs() < 0.25,
                "{}: r1 {}",
                a.code,
                num / den
            );
        }
    }

    #[test]
    fn holdings_sum_to_one_and_respect_caps() {
        let assets = file("assets.csv");
        let caps: Vec<(String, u32)> = rows(&assets)
            .iter()
            .map(|r| {
                (
                    r[0].to_string(),
                    (r[5].parse::<f64>().unwrap() * 400.0).round() as u32,
                )
            })
            .collect();
        let holdings = file("holdings.csv");
        let mut total = 0;
        for row in rows(&holdings) {
            let units = row[1].parse::<f64>().unwrap() * 400.0;
            assert!(
                (units - units.round()).abs() < 1e-9,
                "{} not a multiple of 0.0025",
                row[0]
            );
            let cap = caps
                .iter()
                .find(|(c, _)| c == row[0])
                .expect("held asset is listed")
                .1;
            assert!(units.round() as u32 <= cap, "{} over its cap", row[0]);
            total += units.round() as u32;
        }
        assert_eq!(total, 400);
        assert!(rows(&holdings).len() >= 40);
    }

    #[test]
    fn caps_are_within_the_agreed_ranges() {
        for a in &ASSETS {
            let upper = if a.kind == Cash { 80 } else { 60 };
            assert!((16..=upper).contains(&a.max_units), "{}", a.code);
        }
        assert_eq!(ASSETS.iter().filter(|a| a.kind == Cash).count(), 1);
    }

    #[test]
    fn crash_hits_equities_while_government_bonds_rally() {
        let p = parse_prices();
        let (first, last) = (p.row_of(CRASH.first), p.row_of(CRASH.last));
        let base = first - 1;
        let equity = p.class_index("equity", base, base..=last);
        let trough = equity.iter().copied().fold(f64::INFINITY, f64::min);
        assert!(trough <= 0.80, "equity trough {trough}");
        let government = p.class_index("government", base, base..=last);
        assert!(government[government.len() - 1] > 1.0);
        for code in ["GOVL-01", "GOVL-02", "GOVL-03", "GOVL-04"] {
            let col = p.column(code);
            assert!(col[last] > col[base], "{code} fell in the crash");
        }
    }

    #[test]
    fn liability_proxy_moves_with_long_bonds_and_further() {
        let p = parse_prices();
        let proxy = p.column(LIABILITY_PROXY);
        let long = |day: usize| {
            ["GOVL-01", "GOVL-02", "GOVL-03", "GOVL-04"]
                .iter()
                .map(|c| p.column(c)[day].expect("no blanks here"))
                .sum::<f64>()
        };
        let at = |day: usize| proxy[day].expect("the proxy has no blanks");
        for (episode, rises) in [(&CRASH, true), (&RATE_RISE, false)] {
            let (base, last) = (p.row_of(episode.first) - 1, p.row_of(episode.last));
            let (liab, bonds) = (at(last) / at(base) - 1.0, long(last) / long(base) - 1.0);
            assert_eq!(
                liab > 0.0,
                rises,
                "{liab} in {}..{}",
                episode.first,
                episode.last
            );
            assert!(
                liab.abs() > bonds.abs(),
                "proxy {liab} against long bonds {bonds}"
            );
        }
    }

    #[test]
    fn rate_rise_hits_bonds_and_equities_together() {
        let p = parse_prices();
        let (base, last) = (p.row_of(RATE_RISE.first) - 1, p.row_of(RATE_RISE.last));
        for class in ["equity", "government", "credit"] {
            let index = p.class_index(class, base, last..=last);
            assert!(index[0] < 0.97, "{class} only moved to {}", index[0]);
        }
    }

    fn correlation(a: &[Option<f64>], b: &[Option<f64>]) -> f64 {
        let log_returns = |c: &[Option<f64>]| -> Vec<f64> {
            c.windows(2)
                .map(|w| (w[1].unwrap() / w[0].unwrap()).ln())
                .collect()
        };
        let (x, y) = (log_returns(a), log_returns(b));
        let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
        let (mx, my) = (mean(&x), mean(&y));
        let cov: f64 = x.iter().zip(&y).map(|(p, q)| (p - mx) * (q - my)).sum();
        let var = |v: &[f64], m: f64| v.iter().map(|p| (p - m).powi(2)).sum::<f64>();
        cov / (var(&x, mx) * var(&y, my)).sqrt()
    }

    #[test]
    fn stock_bond_correlation_flips_sign_when_rates_rise() {
        let p = parse_prices();
        let (equity, bond) = (p.column("EQDV-01"), p.column("GOVL-01"));
        let overall = correlation(&equity, &bond);
        assert!(overall < -0.05, "overall {overall}");
        let window = p.row_of(RATE_RISE.first) - 1..=p.row_of(RATE_RISE.last);
        let rising = correlation(&equity[window.clone()], &bond[window]);
        assert!(rising > 0.1, "rate rise {rising}");
    }

    #[test]
    fn volatilities_are_in_their_classes_ranges() {
        let p = parse_prices();
        let equity = annual_vol(&p.column("EQDV-01"));
        assert!((0.15..=0.22).contains(&equity), "equity vol {equity}");
        let government = annual_vol(&p.column("GOVL-01"));
        assert!(
            (0.04..=0.09).contains(&government),
            "government vol {government}"
        );
        let cash = annual_vol(&p.column("CASH-01"));
        assert!(cash < 0.005, "cash vol {cash}");
    }

    #[test]
    fn summary_matches_the_written_files() {
        let dir = std::env::temp_dir().join(format!("tailpack-demo-{}", std::process::id()));
        let summary = write_demo_data(&dir).expect("write demo data");
        assert_eq!(summary.assets, 50);
        assert_eq!((summary.first, summary.last), (FIRST_DAY, LAST_DAY));
        for (name, contents) in render_demo_files() {
            assert_eq!(std::fs::read_to_string(dir.join(name)).unwrap(), contents);
        }
        let rows = std::fs::read_to_string(dir.join("prices.csv"))
            .unwrap()
            .lines()
            .count();
        assert_eq!(summary.days, rows - 2);
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
