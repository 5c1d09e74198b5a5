//! Phase 2: for one result, find the limits and spec in force on its
//! analysis date and carry reading, MDL, LOQ, upper range and limit into the
//! sample's own unit through its mass, volume and dilution.

use crate::numeric::LARGEST;
use crate::problem::{Problem, ProblemKind};
use crate::read::{InForce, LimitRow, Loc, ResultRow, SpecLookup, SpecRow, Workspace};
use crate::units::{Dimension, Unit, convert};
use chrono::{Datelike, NaiveDate};
use rust_decimal::Decimal;
use std::collections::HashMap;
use std::rc::Rc;

#[derive(Debug, thiserror::Error)]
pub enum ResolveError {
    #[error("{at}: {problem}")]
    Units {
        at: Loc,
        problem: String,
        hint: String,
    },
    #[error("{at}: arithmetic overflow computing {what}")]
    Overflow { at: Loc, what: &'static str },
}

impl ResolveError {
    pub fn hint(&self) -> String {
        match self {
            ResolveError::Units { hint, .. } => hint.clone(),
            ResolveError::Overflow { .. } => {
                "a number on this row is far outside any real measurement; check it".into()
            }
        }
    }
}

#[derive(Debug, Clone)]
pub struct ResolvedSpec<'w> {
    pub row: &'w SpecRow,
    /// The limit in the result's unit.
    pub limit: Decimal,
}

/// Everything a result needs to be classified, in the result's unit.
#[derive(Debug, Clone)]
pub struct Resolved<'w> {
    pub limits: &'w LimitRow,
    pub unit: Unit,
    pub value: Decimal,
    pub mdl: Decimal,
    pub loq: Decimal,
    /// The highest calibration standard carried into sample units, for a
    /// result over range.
    pub upper: Option<Decimal>,
    pub over_range: bool,
    pub spec: Option<ResolvedSpec<'w>>,
    /// The study's spike SD scaled to the sample exactly as the MDL is, and
    /// its number of spikes; when the register row keeps them.
    pub spike_sd: Option<(Decimal, u32)>,
}

pub enum Resolution<'w> {
    Resolved(Resolved<'w>),
    Blocked(Problem),
}

fn overflow(row: &ResultRow, what: &'static str) -> ResolveError {
    ResolveError::Overflow {
        at: row.loc("reading"),
        what,
    }
}

/// The unit a result is reported in: mg/kg for a solid (mass given), the
/// reading's own unit for a liquid.
pub fn result_unit(row: &ResultRow) -> Unit {
    if row.mass_g.is_some() {
        Unit::MgPerKg
    } else {
        row.reading_unit
    }
}

/// `x` in sample terms, or None (overflow) from `LARGEST` on: below it every
/// rounding of a result is total, and nothing near it is a measurement.
fn within_range(x: Option<Option<Decimal>>) -> Option<Option<Decimal>> {
    match x {
        Some(Some(v)) if v.abs() >= LARGEST => None,
        x => x,
    }
}

/// Carries a reading-level quantity (reading, digest MDL, upper range) into
/// the sample's unit: C = x × dilution × volume_ml / mass_g for a solid,
/// C = x × dilution for a liquid.
pub fn reading_to_sample(row: &ResultRow, x: Decimal, x_unit: Unit) -> Option<Option<Decimal>> {
    within_range(scaled_reading(row, x, x_unit))
}

fn scaled_reading(row: &ResultRow, x: Decimal, x_unit: Unit) -> Option<Option<Decimal>> {
    let diluted = x.checked_mul(row.dilution)?;
    match (row.mass_g, row.volume_ml) {
        (Some(m), Some(v)) => {
            if x_unit.dimension() != Dimension::MassConcentration {
                return Some(None);
            }
            // µg/L × mL / g = µg/kg; / 1000 = mg/kg.
            let num = diluted.checked_mul(x_unit.base_factor())?.checked_mul(v)?;
            let den = m.checked_mul(Decimal::ONE_THOUSAND)?;
            Some(Some(num.checked_div(den)?))
        }
        _ => {
            if x_unit.dimension() != row.reading_unit.dimension() {
                return Some(None);
            }
            convert(diluted, x_unit, row.reading_unit).map(Some)
        }
    }
}

/// A register limit in mass-fraction units, scaled for this sample:
/// MDL_s = MDL × dilution × (nominal_mass_g / mass_g) × (volume_ml / nominal_volume_ml).
fn fraction_to_sample(row: &ResultRow, limits: &LimitRow, x: Decimal) -> Option<Option<Decimal>> {
    let mut num = x.checked_mul(row.dilution)?;
    let mut den = Decimal::ONE;
    if let (Some(nominal), Some(m)) = (limits.nominal_mass_g, row.mass_g) {
        num = num.checked_mul(nominal)?;
        den = den.checked_mul(m)?;
    }
    if let (Some(nominal), Some(v)) = (limits.nominal_volume_ml, row.volume_ml) {
        num = num.checked_mul(v)?;
        den = den.checked_mul(nominal)?;
    }
    let scaled = num.checked_div(den)?;
    // Outer None: overflow; inner None: the units cannot meet.
    if limits.unit.dimension() != result_unit(row).dimension() {
        return Some(None);
    }
    convert(scaled, limits.unit, result_unit(row)).map(Some)
}

fn limit_to_sample(row: &ResultRow, limits: &LimitRow, x: Decimal) -> Option<Option<Decimal>> {
    match limits.unit.dimension() {
        Dimension::MassFraction => within_range(fraction_to_sample(row, limits, x)),
        Dimension::MassConcentration => reading_to_sample(row, x, limits.unit),
    }
}

fn unit_mismatch(row: &ResultRow, limits: &LimitRow, what: &str) -> ResolveError {
    ResolveError::Units {
        at: Loc::new(&limits.file, limits.line, "unit"),
        problem: format!(
            "{what} in {} cannot apply to {} ({} result in {})",
            limits.unit,
            row.lab_id,
            if row.mass_g.is_some() {
                "a solid"
            } else {
                "a liquid"
            },
            result_unit(row)
        ),
        hint: format!(
            "a liquid result needs register limits in a concentration unit; a solid needs mass_g and volume_ml on {}:{}",
            row.file, row.line
        ),
    }
}

/// A memory of lookups by three shared names and a date: a batch repeats a
/// few such combinations on every row. Keyed by the names' addresses; the
/// names are kept (cloned) beside the answer, so an address stands for one
/// name while it is remembered.
struct Memo<T> {
    map: HashMap<MemoKey, ([Rc<str>; 3], T), crate::fasthash::BuildWords>,
}

/// The three names' addresses and the day.
type MemoKey = ([usize; 3], i32);

/// Combinations remembered before the memory starts again: far more than a
/// batch's analytes, matrices, methods and days make in practice, and a
/// bound on memory whatever the file holds.
const MEMO_MOST: usize = 4096;

impl<T: Clone> Memo<T> {
    fn new() -> Memo<T> {
        Memo {
            map: HashMap::default(),
        }
    }

    fn get_or(&mut self, names: [&Rc<str>; 3], date: NaiveDate, look: impl FnOnce() -> T) -> T {
        let key = (
            names.map(|n| Rc::as_ptr(n) as *const u8 as usize),
            date.num_days_from_ce(),
        );
        if let Some((_, value)) = self.map.get(&key) {
            return value.clone();
        }
        let value = look();
        if self.map.len() >= MEMO_MOST {
            self.map.clear();
        }
        self.map.insert(key, (names.map(Rc::clone), value.clone()));
        value
    }
}

/// What stays the same from row to row of a batch: the register and spec
/// rows in force for each combination met.
pub struct Lookups<'w> {
    limits: Memo<InForce<'w>>,
    specs: Memo<SpecLookup<'w>>,
}

impl Default for Lookups<'_> {
    fn default() -> Self {
        Lookups {
            limits: Memo::new(),
            specs: Memo::new(),
        }
    }
}

pub fn resolve<'w>(row: &ResultRow, ws: &'w Workspace) -> Result<Resolution<'w>, ResolveError> {
    resolve_with(row, ws, &mut Lookups::default())
}

/// As `resolve`, remembering lookups across the rows of one batch.
pub fn resolve_with<'w>(
    row: &ResultRow,
    ws: &'w Workspace,
    lookups: &mut Lookups<'w>,
) -> Result<Resolution<'w>, ResolveError> {
    let in_force = lookups.limits.get_or(
        [&row.analyte, &row.matrix, &row.method],
        row.analyzed_on,
        || {
            ws.register
                .in_force(&row.analyte, &row.matrix, &row.method, row.analyzed_on)
        },
    );
    let limits = match in_force {
        InForce::Row(r) => r,
        InForce::NoRow => {
            return Ok(Resolution::Blocked(Problem {
                at: row.loc("analyte"),
                lab_id: row.lab_id.clone(),
                analyte: row.analyte.clone(),
                kind: ProblemKind::MissingLimits,
                message: format!(
                    "no limits in {} for {} / {} / {}",
                    ws.register.file, row.analyte, row.matrix, row.method
                ),
                hint: "add the MDL and LOQ row from the method's study to the register, or correct the analyte, matrix or method".into(),
            }));
        }
        InForce::NotYet(first) => {
            return Ok(Resolution::Blocked(Problem {
                at: row.loc("analyzed_on"),
                lab_id: row.lab_id.clone(),
                analyte: row.analyte.clone(),
                kind: ProblemKind::MissingLimits,
                message: format!(
                    "analysed {}, before the first limits for {} / {} / {} took effect ({first})",
                    row.analyzed_on, row.analyte, row.matrix, row.method
                ),
                hint: "check the analysis date; the register holds no limit in force on that day"
                    .into(),
            }));
        }
    };
    let unit = result_unit(row);
    let value = reading_to_sample(row, row.reading, row.reading_unit)
        .ok_or_else(|| overflow(row, "the result"))?
        .ok_or_else(|| unit_mismatch(row, limits, "the reading"))?;
    let mdl = limit_to_sample(row, limits, limits.mdl)
        .ok_or_else(|| overflow(row, "the sample MDL"))?
        .ok_or_else(|| unit_mismatch(row, limits, "the MDL"))?;
    let loq = limit_to_sample(row, limits, limits.loq)
        .ok_or_else(|| overflow(row, "the sample LOQ"))?
        .ok_or_else(|| unit_mismatch(row, limits, "the LOQ"))?;
    let spike_sd = match limits.spike_sd {
        None => None,
        Some((sd, n)) => Some((
            limit_to_sample(row, limits, sd)
                .ok_or_else(|| overflow(row, "the sample's spike SD"))?
                .ok_or_else(|| unit_mismatch(row, limits, "the spike SD"))?,
            n,
        )),
    };
    let (upper, over_range) = upper_range(row, limits)?;
    let spec = match &row.spec {
        None => None,
        Some(name) => match spec_in_force(row, ws, name, unit, &mut lookups.specs)? {
            Ok(spec) => Some(spec),
            Err(problem) => return Ok(Resolution::Blocked(problem)),
        },
    };
    Ok(Resolution::Resolved(Resolved {
        limits,
        unit,
        value,
        mdl,
        loq,
        upper,
        over_range,
        spec,
        spike_sd,
    }))
}

/// Whether the reading lies above the calibrated upper range, and if so
/// the range in the sample's terms (what the result is reported above).
fn upper_range(
    row: &ResultRow,
    limits: &LimitRow,
) -> Result<(Option<Decimal>, bool), ResolveError> {
    Ok(match limits.upper_range {
        None => (None, false),
        Some((upper, upper_unit)) => {
            let upper_at_reading =
                convert(upper, upper_unit, row.reading_unit).ok_or_else(|| {
                    ResolveError::Units {
                        at: Loc::new(&limits.file, limits.line, "upper_range_unit"),
                        problem: format!(
                            "upper range in {upper_unit} cannot be compared with a reading in {}",
                            row.reading_unit
                        ),
                        hint: "give the upper range in the same kind of unit the instrument reads"
                            .into(),
                    }
                })?;
            if row.reading <= upper_at_reading {
                // Only a result over range is reported against the range.
                return Ok((None, false));
            }
            let in_sample = reading_to_sample(row, upper, upper_unit)
                .ok_or_else(|| overflow(row, "the upper range"))?
                .ok_or_else(|| unit_mismatch(row, limits, "the upper range"))?;
            (Some(in_sample), true)
        }
    })
}

/// The spec limit in force for the row, in the result's unit; a problem
/// (not an error) when the spec sets none.
fn spec_in_force<'w>(
    row: &ResultRow,
    ws: &'w Workspace,
    name: &Rc<str>,
    unit: Unit,
    memo: &mut Memo<SpecLookup<'w>>,
) -> Result<Result<ResolvedSpec<'w>, Problem>, ResolveError> {
    let lookup = memo.get_or([name, &row.analyte, &row.matrix], row.analyzed_on, || {
        ws.specs
            .in_force(name, &row.analyte, &row.matrix, row.analyzed_on)
    });
    let message = match lookup {
        SpecLookup::Row(spec_row) => {
            let limit = convert(spec_row.limit, spec_row.unit, unit).ok_or_else(|| {
                ResolveError::Units {
                    at: Loc::new(&spec_row.file, spec_row.line, "unit"),
                    problem: format!(
                        "spec {} is in {}, but {} is reported in {unit}",
                        spec_row.spec, spec_row.unit, row.lab_id
                    ),
                    hint: SPEC_UNIT_HINT.into(),
                }
            })?;
            return Ok(Ok(ResolvedSpec {
                row: spec_row,
                limit,
            }));
        }
        SpecLookup::UnknownSpec => format!("spec `{name}` is not in {}", ws.specs.file),
        SpecLookup::NotYet(first) => format!(
            "spec `{name}` sets no limit for {} in force on {} (its first is from {first})",
            row.analyte, row.analyzed_on
        ),
        _ => format!(
            "spec `{name}` sets no limit for {} in {}",
            row.analyte, row.matrix
        ),
    };
    Ok(Err(Problem {
        at: row.loc("spec"),
        lab_id: row.lab_id.clone(),
        analyte: row.analyte.clone(),
        kind: ProblemKind::MissingSpec,
        message,
        hint: "correct the spec id, or add the limit to specs.csv with its citation".into(),
    }))
}

const SPEC_UNIT_HINT: &str =
    "a limit for a solid is a mass fraction (mg/kg, %); for a liquid, a concentration (µg/L, mg/L)";

#[cfg(test)]
mod tests {
    use super::*;
    use crate::read::{Kind, Register};
    use chrono::NaiveDate;
    use std::str::FromStr;

    fn d(s: &str) -> Decimal {
        Decimal::from_str(s).unwrap()
    }

    fn solid(reading: &str, dilution: &str, mass: &str, volume: &str) -> ResultRow {
        ResultRow {
            file: "r.csv".into(),
            line: 2,
            lab_id: "S1".into(),
            client_id: String::new(),
            description: String::new(),
            kind: Kind::Sample,
            analyte: "Pb".into(),
            matrix: "paint".into(),
            method: "6010D".into(),
            reading: d(reading),
            reading_unit: Unit::UgPerL,
            dilution: d(dilution),
            mass_g: Some(d(mass)),
            volume_ml: Some(d(volume)),
            analyzed_on: NaiveDate::from_ymd_opt(2026, 11, 13).unwrap(),
            spec: None,
            uncertainty_pct: None,
            spike_added: None,
            parent_id: None,
        }
    }

    // Digest-to-sample calculation as in EPA SW-846 Method 3050B, Section 12
    // (from memory): mg/kg = C × V / W, C in mg/L of the digest, V in L, W in kg.
    // Worked: 50 µg/L = 0.050 mg/L, V = 0.050 L, W = 0.000100 kg
    // -> 0.050 × 0.050 / 0.000100 = 25.0 mg/kg.
    #[test]
    fn digest_to_sample_worked_example() {
        let row = solid("50", "1", "0.100", "50");
        assert_eq!(
            reading_to_sample(&row, row.reading, row.reading_unit),
            Some(Some(d("25")))
        );
        // Dilution multiplies the result; mg/L readings scale by 1000.
        let row = solid("50", "10", "0.100", "50");
        assert_eq!(
            reading_to_sample(&row, d("0.050"), Unit::MgPerL),
            Some(Some(d("250")))
        );
    }

    fn register(unit: &str, nominal: &str) -> Register {
        Register::parse(
            "limits.csv",
            format!(
                "analyte,matrix,method,unit,mdl,loq,effective_from,nominal_mass_g,nominal_volume_ml\n\
                 Pb,paint,6010D,{unit},2,6,2025-01-01,{nominal}\n"
            )
            .as_bytes(),
        )
        .unwrap()
    }

    #[test]
    fn mass_fraction_limits_scale_with_mass_volume_and_dilution() {
        let reg = register("mg/kg", "0.250,50");
        let row = solid("1", "5", "0.100", "50");
        // 2 × 5 × (0.250 / 0.100) × (50 / 50) = 25 mg/kg
        assert_eq!(
            fraction_to_sample(&row, &reg.rows[0], d("2")),
            Some(Some(d("25")))
        );
        // A blank nominal leaves its ratio at 1.
        let reg = register("mg/kg", ",");
        assert_eq!(
            fraction_to_sample(&row, &reg.rows[0], d("2")),
            Some(Some(d("10")))
        );
    }

    #[test]
    fn digest_limits_convert_like_a_reading() {
        let reg = register("ug/L", ",");
        let row = solid("1", "2", "0.100", "50");
        // 2 µg/L × 2 × 50 mL / 0.100 g / 1000 = 2 mg/kg
        assert_eq!(
            limit_to_sample(&row, &reg.rows[0], d("2")),
            Some(Some(d("2")))
        );
    }

    #[test]
    fn overflow_is_reported_not_panicked() {
        let row = solid("79228162514264337593543950335", "10", "0.1", "50");
        assert_eq!(reading_to_sample(&row, row.reading, row.reading_unit), None);
    }

    #[test]
    fn results_near_the_end_of_the_decimal_range_are_overflow() {
        // A liquid at dilution 1 is its reading: the bound is exact.
        let mut row = solid("1", "1", "1", "1");
        (row.mass_g, row.volume_ml) = (None, None);
        let at = |r: &str| reading_to_sample(&row, d(r), Unit::UgPerL);
        assert_eq!(at("70000000000000000000000000000"), None);
        assert_eq!(at("-70000000000000000000000000000"), None);
        let below = d("69999999999999999999999999999");
        assert_eq!(at("69999999999999999999999999999"), Some(Some(below)));
        // A register limit in a mass fraction is bounded too.
        let ws = workspace(
            "analyte,matrix,method,unit,mdl,loq,effective_from\nPb,paint,6010D,mg/kg,1,2,2025-01-01\n",
            SPECS,
        );
        let limits = &ws.register.rows[0];
        let huge = d("70000000000000000000000000000");
        assert_eq!(
            limit_to_sample(&solid("1", "1", "0.5", "50"), limits, huge),
            None
        );
    }

    fn workspace(limits: &str, specs: &str) -> Workspace {
        let lab_text = "name = \"L\"\naddress = \"A\"\nsignatory = \"S\"\n".to_string();
        Workspace {
            root: std::path::PathBuf::from("."),
            lab: crate::read::Lab::parse("lab.toml", &lab_text).unwrap(),
            lab_text,
            qc_text: None,
            register: Register::parse("limits.csv", limits.as_bytes()).unwrap(),
            specs: crate::read::Specs::parse("specs.csv", specs.as_bytes()).unwrap(),
            register_sha256: String::new(),
            specs_sha256: String::new(),
        }
    }

    const LIMITS: &str = "analyte,matrix,method,unit,mdl,loq,effective_from,upper_range,upper_range_unit\n\
                          Pb,paint,6010D,ug/L,2,6,2025-01-01,1000,ug/L\n";
    const SPECS: &str = "spec,analyte,matrix,limit,unit,citation,effective_from\n\
                         P,Pb,paint,0.009,%,test limit,2009-01-01\n\
                         L,Pb,paint,5,ug/L,liquid limit,2009-01-01\n\
                         F,Pb,paint,50,mg/kg,future limit,2027-01-01\n";

    fn resolved<'w>(row: &ResultRow, ws: &'w Workspace) -> Resolved<'w> {
        match resolve(row, ws).unwrap() {
            Resolution::Resolved(r) => r,
            Resolution::Blocked(p) => panic!("blocked: {}", p.message),
        }
    }

    // The upper range is the highest calibration standard: a reading above it
    // is over range, one exactly at it is not (common practice, no source).
    #[test]
    fn over_range_starts_above_the_highest_standard() {
        let ws = workspace(LIMITS, SPECS);
        let at = resolved(&solid("1000", "1", "0.100", "50"), &ws);
        assert!(!at.over_range);
        assert_eq!(at.upper, None);
        let above = resolved(&solid("1000.001", "1", "0.100", "50"), &ws);
        assert!(above.over_range);
        // 1000 µg/L × 50 mL / 0.100 g / 1000 = 500 mg/kg
        assert_eq!(above.upper, Some(d("500")));
        let below = resolved(&solid("999", "1", "0.100", "50"), &ws);
        assert!(!below.over_range);
        // Dilution scales the range the sample is reported over.
        let diluted = resolved(&solid("1001", "10", "0.100", "50"), &ws);
        assert!(diluted.over_range);
        assert_eq!(diluted.upper, Some(d("5000")));
    }

    // 0.009 % = 90 mg/kg (1 % = 10,000 mg/kg, SI definition of the ratio).
    #[test]
    fn the_spec_in_force_is_converted_to_the_result_unit() {
        let ws = workspace(LIMITS, SPECS);
        let mut row = solid("50", "1", "0.100", "50");
        row.spec = Some("P".into());
        let r = resolved(&row, &ws);
        let spec = r.spec.expect("spec P applies");
        assert_eq!(spec.limit, d("90"));
        assert_eq!(&*spec.row.citation, "test limit");
        // A concentration limit cannot judge a mass fraction: an error at the spec row.
        row.spec = Some("L".into());
        let Err(e) = resolve(&row, &ws) else {
            panic!("a concentration limit on a mass fraction must be refused");
        };
        assert!(
            e.to_string().starts_with("specs.csv:3: field `unit`"),
            "{e}"
        );
        assert!(e.hint().contains("mass fraction"), "{}", e.hint());
        // An unknown spec, or one not yet in force, blocks with a problem
        // that says which.
        let blocked = |row: &ResultRow| match resolve(row, &ws) {
            Ok(Resolution::Blocked(p)) => p.message,
            _ => panic!("must block"),
        };
        row.spec = Some("NOPE".into());
        assert_eq!(blocked(&row), "spec `NOPE` is not in specs.csv");
        row.spec = Some("F".into());
        let m = blocked(&row);
        assert!(
            m.contains("in force on 2026-11-13") && m.contains("2027-01-01"),
            "{m}"
        );
    }

    #[test]
    fn a_liquid_reading_cannot_take_mass_fraction_limits() {
        let mut row = solid("5", "1", "0.1", "50");
        row.mass_g = None;
        row.volume_ml = None;
        // A liquid keeps the reading's unit; mg/kg limits cannot be put in it.
        assert_eq!(reading_to_sample(&row, d("2"), Unit::MgPerKg), Some(None));
        assert_eq!(
            reading_to_sample(&row, d("2"), Unit::MgPerL),
            Some(Some(d("2000")))
        );
    }

    #[test]
    fn errors_carry_their_hints() {
        let u = ResolveError::Units {
            at: Loc::new("f", 1, "unit"),
            problem: "p".into(),
            hint: "give the unit".into(),
        };
        assert_eq!(u.hint(), "give the unit");
        let o = ResolveError::Overflow {
            at: Loc::new("f", 2, "reading"),
            what: "the result",
        };
        assert!(o.hint().contains("far outside"), "{}", o.hint());
        assert_eq!(
            o.to_string(),
            "f:2: field `reading`: arithmetic overflow computing the result"
        );
    }
}
