//! Generates the demo market: the invented town of Wrenmoor.
//!
//! Everything here is made up — the town, its districts, every sale. The data
//! follow a known "true" hedonic model so that a study can be checked against
//! the truth:
//!
//! ```text
//! ln(price) = 7.15 + 0.62·ln(living_area) + 0.11·ln(lot_size) − 0.0042·age
//!           + 0.085·(quality − 3) + 0.045·bathrooms + district effect
//!           + 0.0040·months − 0.040·distance
//!           + (age coefficient(r) + 0.0042)·(age − 60) + ε,
//! ε ~ Normal(0, σᵢ),  σᵢ = 0.085 · (living_area / 1800)^0.35   (heteroskedastic)
//! ```
//!
//! District effects (reference Wickerholm = 0): Tidewright Quay +0.18, Brambleknot −0.09,
//! Corvel Heights +0.27, Mossgrieve −0.15, Pellowick +0.05.
//!
//! **The town plan.** Wrenmoor lies on a 9 km × 6 km plane (coordinates `x`,
//! `y` in km, east and north of the town's south-west corner). Each district
//! is a 3 km square; a parcel's place is drawn uniformly inside its district:
//!
//! ```text
//!  y 6 ┌──────────────┬────────────────┬────────────────┐
//!      │  Pellowick   │ Tidewright Quay│ Corvel Heights │
//!    3 ├──────────────┼───────●────────┼────────────────┤   ● Lantern Green (4.5, 3.0)
//!      │ Brambleknot  │   Wickerholm   │   Mossgrieve   │
//!    0 └──────────────┴────────────────┴────────────────┘
//!      0              3                6                9  x
//! ```
//!
//! `distance` is the straight-line distance in km from Lantern Green, the
//! town's park: prices fall 4 % per km from it (`−0.040` in logs), *inside*
//! every district as well as between them. District indicators capture only
//! each district's average distance, so a district-only model leaves a smooth
//! spatial pattern in its residuals; a distance term removes it. The truth
//! file records the surface.
//!
//! **Age near a district's core.** Every district grew around an old core at
//! the centre of its square. Near the core, older homes hold their value
//! (character houses, mature trees); toward the district's edge, among the
//! newer estates, each year of age costs more. The age coefficient varies
//! over the map with the distance `r` (km) from the parcel's district centre:
//!
//! ```text
//! age coefficient(r) = −0.0042 − 0.0020·(r − r̄),   r̄ = 3·(√2 + asinh 1)/6 ≈ 1.148 km
//! ```
//!
//! (`r̄` is the mean distance from the centre of a 3 km square to a point
//! drawn uniformly in it, so the coefficient averages the town's −0.0042 in
//! every district: −0.0019 at a core, −0.0061 at a district's corner.) The
//! variation pivots on an age of 60 years: the term added to ln(price) is
//! `(coefficient(r) + 0.0042)·(age − 60)`, so a home of 60 years is priced
//! alike anywhere in its district, a new one is dearer at the edge and an old
//! one dearer near the core. Because ages are drawn independently of places,
//! a model with one age coefficient estimates the town's −0.0042 and leaves
//! no spatial pattern in its residuals' mean, and the per-district models of
//! the market-areas study share the same average slope; only a local fit can
//! see the variation. The truth file records the surface.
//!
//! `months` counts from 1 January 2023 the way Plumbline's months-since date
//! term does: whole calendar months plus the day's fraction of its month,
//! `(day − 1) / days_in_month` (see `plumbline::data::dates`).
//!
//! Files written to the output folder (default `notebooks-demo/data`):
//! * `sales.csv` — 3,000 sales from January 2023 to December 2025, with a few
//!   deliberately bad records: five living areas keyed with an extra digit,
//!   three family transfers far below market (`sale_type = non-arms-length`),
//!   and twelve missing lot sizes.
//! * `subjects.csv` — 40 unsold properties to value (no price); their
//!   `sale_date` is the valuation date, 2026-01-01, which the trend term reads.
//! * `parcels.csv` — the town's roll as of 2026-01-01: every parcel above (the
//!   3,000 sold, the 300 that sell in the next quarter, the 40 subjects) with
//!   its correct characteristics, `age` at 2026 and a `sale_date` column
//!   holding the valuation date; the study values every parcel on it, so a
//!   rerun can compare sold and unsold parcels' value changes.
//! * `truth.json` — the true coefficients above, named as the design columns
//!   of a Plumbline fit (for the check that the study recovers them), and
//!   the location surface.
//! * `sales-next-quarter.csv` — the same market one quarter on: 3,000 earlier
//!   sales plus 300 new ones from January–March 2026, in which prices rose a
//!   further 3 % (`ln` shift 0.0296) on top of the monthly trend.
//!
//! Usage: `cargo run -p plumbline-demo-data -- [OUTPUT_DIR] [--seed N]` (seed 20261202).

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha20Rng;
use rand_distr::{Distribution, Normal};
use std::fmt::Write as _;
use std::path::PathBuf;

const DISTRICTS: [(&str, f64, f64); 6] = [
    // name, effect on ln(price), relative frequency
    ("Wickerholm", 0.0, 0.24),
    ("Tidewright Quay", 0.18, 0.14),
    ("Brambleknot", -0.09, 0.18),
    ("Corvel Heights", 0.27, 0.12),
    ("Mossgrieve", -0.15, 0.16),
    ("Pellowick", 0.05, 0.16),
];
const NEXT_QUARTER_SHIFT: f64 = 0.0296;
// The true model's coefficients (see the module documentation).
const TRUE_INTERCEPT: f64 = 7.15;
const TRUE_LOG_AREA: f64 = 0.62;
const TRUE_LOG_LOT: f64 = 0.11;
const TRUE_AGE_DECLINE: f64 = 0.0042;
const TRUE_QUALITY: f64 = 0.085;
const TRUE_BATHROOMS: f64 = 0.045;
const TRUE_MONTHLY_TREND: f64 = 0.0040;
/// Change of ln(price) per km of distance from Lantern Green.
const TRUE_DISTANCE_PER_KM: f64 = -0.040;
/// Lantern Green, the town's park, in km from the south-west corner.
const LANTERN_GREEN: (f64, f64) = (4.5, 3.0);
/// South-west corner (km) of each district's 3 km square, in `DISTRICTS` order.
const DISTRICT_CORNERS: [(f64, f64); 6] = [(3.0, 0.0), (3.0, 3.0), (0.0, 0.0), (6.0, 3.0), (6.0, 0.0), (0.0, 3.0)];
/// Side of a district's square, km.
const DISTRICT_SIDE: f64 = 3.0;
/// Change of the age coefficient per km from the district's core (its
/// square's centre): the yearly decline steepens toward the district's edge.
const AGE_COEFFICIENT_PER_KM_FROM_CORE: f64 = -0.0020;
/// The age (years) at which the varying age coefficient changes nothing.
const AGE_PIVOT: f64 = 60.0;

/// Mean distance (km) from the centre of a district's square to a point drawn
/// uniformly in it: side·(√2 + asinh 1)/6, the classical mean distance from
/// the centre of a square (for the unit square 0.3826…).
fn mean_distance_to_core() -> f64 {
    DISTRICT_SIDE * (std::f64::consts::SQRT_2 + 1f64.asinh()) / 6.0
}

/// Centre (km) of a district's square: its old core.
fn district_core(district: usize) -> (f64, f64) {
    let (corner_x, corner_y) = DISTRICT_CORNERS[district];
    (corner_x + DISTRICT_SIDE / 2.0, corner_y + DISTRICT_SIDE / 2.0)
}

/// The true age coefficient (per year, in ln price) at a place `distance_to_core`
/// km from its district's core; it averages −`TRUE_AGE_DECLINE` over a district.
fn age_coefficient_at(distance_to_core: f64) -> f64 {
    -TRUE_AGE_DECLINE + AGE_COEFFICIENT_PER_KM_FROM_CORE * (distance_to_core - mean_distance_to_core())
}

/// The true model as a JSON document whose coefficient names are the design
/// columns a Plumbline fit of the same specification produces (quality enters
/// uncentred, so the intercept absorbs −3 × its coefficient).
fn truth_json() -> String {
    let mut terms = vec![
        ("intercept".to_string(), TRUE_INTERCEPT - 3.0 * TRUE_QUALITY),
        ("log(living_area)".to_string(), TRUE_LOG_AREA),
        ("log(lot_size)".to_string(), TRUE_LOG_LOT),
        ("age".to_string(), -TRUE_AGE_DECLINE),
        ("quality".to_string(), TRUE_QUALITY),
        ("bathrooms".to_string(), TRUE_BATHROOMS),
    ];
    for (name, effect, _) in DISTRICTS.iter().skip(1) {
        terms.push((format!("district={name}"), *effect));
    }
    terms.push(("sale_date (months since 2023-01-01)".to_string(), TRUE_MONTHLY_TREND));
    terms.push(("distance from Lantern Green".to_string(), TRUE_DISTANCE_PER_KM));
    let body: Vec<String> = terms.iter().map(|(name, value)| format!("    \"{name}\": {value}")).collect();
    let cores: Vec<String> = (0..DISTRICTS.len())
        .map(|d| {
            let (x, y) = district_core(d);
            format!("      {{ \"district\": \"{}\", \"x\": {x}, \"y\": {y} }}", DISTRICTS[d].0)
        })
        .collect();
    format!(
        "{{\n  \"target\": \"log(sale_price)\",\n  \"reference_district\": \"{}\",\n  \"next_quarter_log_shift\": {NEXT_QUARTER_SHIFT},\n  \"location_surface\": {{\n    \"form\": \"linear in the straight-line distance from a point\",\n    \"point\": {{ \"name\": \"Lantern Green\", \"x\": {}, \"y\": {} }},\n    \"coordinate_units\": \"km\",\n    \"log_price_per_km\": {TRUE_DISTANCE_PER_KM}\n  }},\n  \"varying_coefficient\": {{\n    \"term\": \"age\",\n    \"form\": \"coefficient = town_average + per_km_from_core * (r - mean_distance_to_core_km), r the distance in km from the parcel's district core; the term added to ln(price) is (coefficient - town_average) * (age - pivot_age)\",\n    \"town_average\": {},\n    \"per_km_from_core\": {AGE_COEFFICIENT_PER_KM_FROM_CORE},\n    \"mean_distance_to_core_km\": {},\n    \"pivot_age\": {AGE_PIVOT},\n    \"cores\": [\n{}\n    ]\n  }},\n  \"coefficients\": {{\n{}\n  }}\n}}\n",
        DISTRICTS[0].0,
        LANTERN_GREEN.0,
        LANTERN_GREEN.1,
        -TRUE_AGE_DECLINE,
        mean_distance_to_core(),
        cores.join(",\n"),
        body.join(",\n")
    )
}

struct Property {
    parcel: String,
    district: usize,
    /// Place in km east and north of the town's south-west corner.
    x: f64,
    y: f64,
    living_area: f64,
    lot_size: f64,
    year_built: i32,
    quality: i32,
    bathrooms: f64,
}

/// Draws a property's characteristics from `rng` and its place from
/// `places` (a stream of its own, so adding the town plan left every other
/// draw of the generator as it was).
fn draw_property(rng: &mut ChaCha20Rng, places: &mut ChaCha20Rng, index: usize) -> Property {
    let u: f64 = rng.random();
    let mut acc = 0.0;
    let mut district = 0;
    for (i, (_, _, share)) in DISTRICTS.iter().enumerate() {
        acc += share;
        if u <= acc {
            district = i;
            break;
        }
    }
    let area_noise = Normal::new(0.0, 0.28).expect("valid sd");
    let living_area = (1800.0 * f64::exp(area_noise.sample(rng))).clamp(620.0, 5200.0).round();
    let lot_noise = Normal::new(0.0, 0.35).expect("valid sd");
    let lot_size =
        (7200.0 * (living_area / 1800.0).powf(0.5) * f64::exp(lot_noise.sample(rng))).clamp(1800.0, 43000.0).round();
    let year_built = rng.random_range(1908..=2024);
    let q: f64 = rng.random();
    let quality = if q < 0.07 {
        1
    } else if q < 0.28 {
        2
    } else if q < 0.70 {
        3
    } else if q < 0.92 {
        4
    } else {
        5
    };
    let baths_raw = 1.0 + (living_area - 700.0) / 900.0 + Normal::new(0.0, 0.5).expect("valid sd").sample(rng);
    let bathrooms = ((baths_raw * 2.0).round() / 2.0).clamp(1.0, 5.0);
    let (corner_x, corner_y) = DISTRICT_CORNERS[district];
    // Metre precision, as a roll would hold them.
    let x = ((corner_x + DISTRICT_SIDE * places.random::<f64>()) * 1000.0).round() / 1000.0;
    let y = ((corner_y + DISTRICT_SIDE * places.random::<f64>()) * 1000.0).round() / 1000.0;
    Property {
        parcel: format!("WM-{:06}", 100_000 + index * 7),
        district,
        x,
        y,
        living_area,
        lot_size,
        year_built,
        quality,
        bathrooms,
    }
}

fn log_price(p: &Property, months: f64, sale_year: i32, rng: &mut ChaCha20Rng, shift: f64) -> f64 {
    let age = (sale_year - p.year_built).max(0) as f64;
    let mean = TRUE_INTERCEPT + TRUE_LOG_AREA * p.living_area.ln() + TRUE_LOG_LOT * p.lot_size.ln()
        - TRUE_AGE_DECLINE * age
        + TRUE_QUALITY * (p.quality - 3) as f64
        + TRUE_BATHROOMS * p.bathrooms
        + DISTRICTS[p.district].1
        + TRUE_MONTHLY_TREND * months
        + TRUE_DISTANCE_PER_KM * (p.x - LANTERN_GREEN.0).hypot(p.y - LANTERN_GREEN.1)
        + age_variation(p, age)
        + shift;
    let sigma = 0.085 * (p.living_area / 1800.0).powf(0.35);
    mean + Normal::new(0.0, sigma).expect("valid sd").sample(rng)
}

/// The varying part of the age effect: (coefficient(r) − town average)·(age − pivot),
/// r the distance from the property's district core (see the module documentation).
fn age_variation(p: &Property, age: f64) -> f64 {
    let (core_x, core_y) = district_core(p.district);
    let distance_to_core = (p.x - core_x).hypot(p.y - core_y);
    (age_coefficient_at(distance_to_core) + TRUE_AGE_DECLINE) * (age - AGE_PIVOT)
}

/// (year, month, day) of month index `m` (0 = January 2023) and a day.
fn date_of(month_index: i32, day: i32) -> (i32, i32, i32) {
    (2023 + month_index / 12, month_index % 12 + 1, day)
}

/// Days in a month of the Gregorian calendar.
fn days_in_month(year: i32, month: i32) -> i32 {
    match month {
        2 if (year % 4 == 0 && year % 100 != 0) || year % 400 == 0 => 29,
        2 => 28,
        4 | 6 | 9 | 11 => 30,
        _ => 31,
    }
}

const SALES_HEADER: &str =
    "parcel_id,sale_date,sale_price,living_area,lot_size,year_built,age,quality,bathrooms,district,x,y,sale_type\n";

fn sale_row(out: &mut String, p: &Property, month_index: i32, rng: &mut ChaCha20Rng, shift: f64) {
    let day = rng.random_range(1..=28);
    let (year, month, day) = date_of(month_index, day);
    let months = month_index as f64 + (day as f64 - 1.0) / days_in_month(year, month) as f64;
    let price = (log_price(p, months, year, rng, shift).exp() / 100.0).round() * 100.0;
    let age = (year - p.year_built).max(0);
    let _ = writeln!(
        out,
        "{},{year:04}-{month:02}-{day:02},{price:.0},{},{},{},{age},{},{},{},{},{},arms-length",
        p.parcel, p.living_area, p.lot_size, p.year_built, p.quality, p.bathrooms, DISTRICTS[p.district].0, p.x, p.y
    );
}

/// A parcel's line on the roll: its characteristics as of 2026-01-01.
fn roll_row(out: &mut String, p: &Property) {
    let age = (2026 - p.year_built).max(0);
    let _ = writeln!(
        out,
        "{},{},{},{},{age},{},{},{},{},{},2026-01-01",
        p.parcel, p.living_area, p.lot_size, p.year_built, p.quality, p.bathrooms, DISTRICTS[p.district].0, p.x, p.y
    );
}

/// Header of `subjects.csv` and `parcels.csv`.
const ROLL_HEADER: &str = "parcel_id,living_area,lot_size,year_built,age,quality,bathrooms,district,x,y,sale_date\n";

/// Mixed into the seed of the stream that places parcels on the plan.
const PLACE_STREAM: u64 = 0x0070_1a7e;

fn main() -> std::process::ExitCode {
    let mut args = std::env::args().skip(1);
    let mut out_dir = PathBuf::from("notebooks-demo/data");
    let mut seed: u64 = 20261202;
    while let Some(arg) = args.next() {
        if arg == "--seed" {
            match args.next().and_then(|s| s.parse().ok()) {
                Some(s) => seed = s,
                None => {
                    eprintln!("error: --seed needs a whole number");
                    return std::process::ExitCode::FAILURE;
                }
            }
        } else {
            out_dir = PathBuf::from(arg);
        }
    }
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    let mut places = ChaCha20Rng::seed_from_u64(seed ^ PLACE_STREAM);
    let mut roll = String::from(ROLL_HEADER);

    let mut sales = String::from(SALES_HEADER);
    let mut rows: Vec<String> = Vec::new();
    for i in 0..3000 {
        let p = draw_property(&mut rng, &mut places, i);
        roll_row(&mut roll, &p);
        let month_index = rng.random_range(0..36);
        let mut row = String::new();
        sale_row(&mut row, &p, month_index, &mut rng, 0.0);
        rows.push(row);
    }
    // Deliberately bad records, at fixed positions so that the story is stable.
    for &i in &[211usize, 907, 1460, 2118, 2764] {
        // Living area keyed with an extra digit (e.g. 1650 → 16500).
        let mut fields: Vec<String> = rows[i].trim_end().split(',').map(str::to_string).collect();
        let area: f64 = fields[3].parse().unwrap_or(1500.0);
        fields[3] = format!("{}", area * 10.0);
        rows[i] = fields.join(",") + "\n";
    }
    for &i in &[388usize, 1777, 2503] {
        // Family transfers at a fraction of market value.
        let mut fields: Vec<String> = rows[i].trim_end().split(',').map(str::to_string).collect();
        let price: f64 = fields[2].parse().unwrap_or(300000.0);
        fields[2] = format!("{:.0}", (price * 0.35 / 100.0).round() * 100.0);
        fields[12] = "non-arms-length".into();
        rows[i] = fields.join(",") + "\n";
    }
    for &i in &[57usize, 340, 612, 1011, 1299, 1533, 1870, 2045, 2290, 2611, 2830, 2977] {
        let mut fields: Vec<String> = rows[i].trim_end().split(',').map(str::to_string).collect();
        fields[4] = String::new();
        rows[i] = fields.join(",") + "\n";
    }
    rows.iter().for_each(|r| sales.push_str(r));

    let mut next = sales.clone();
    for i in 0..300 {
        let p = draw_property(&mut rng, &mut places, 3000 + i);
        roll_row(&mut roll, &p);
        let month_index = rng.random_range(36..39);
        sale_row(&mut next, &p, month_index, &mut rng, NEXT_QUARTER_SHIFT);
    }

    let mut subjects = String::from(ROLL_HEADER);
    for i in 0..40 {
        let p = draw_property(&mut rng, &mut places, 5000 + i);
        roll_row(&mut subjects, &p);
        roll_row(&mut roll, &p);
    }

    if let Err(e) = std::fs::create_dir_all(&out_dir) {
        eprintln!("error: cannot create `{}`: {e}", out_dir.display());
        return std::process::ExitCode::FAILURE;
    }
    let truth = truth_json();
    for (name, body) in [
        ("sales.csv", &sales),
        ("sales-next-quarter.csv", &next),
        ("subjects.csv", &subjects),
        ("parcels.csv", &roll),
        ("truth.json", &truth),
    ] {
        let path = out_dir.join(name);
        if let Err(e) = std::fs::write(&path, body) {
            eprintln!("error: cannot write `{}`: {e}", path.display());
            return std::process::ExitCode::FAILURE;
        }
        println!("wrote {}", path.display());
    }
    std::process::ExitCode::SUCCESS
}
