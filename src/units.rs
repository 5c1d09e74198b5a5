//! Units of concentration. Mass fractions convert through mg/kg, mass
//! concentrations through µg/L; the two never convert into each other
//! without a sample mass and volume (see `resolve`).

use rust_decimal::Decimal;
use std::fmt;

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Dimension {
    MassFraction,
    MassConcentration,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Unit {
    MgPerKg,
    UgPerG,
    Ppm,
    Ppb,
    UgPerKg,
    Percent,
    UgPerL,
    MgPerL,
    NgPerMl,
    UgPerMl,
}

impl Unit {
    pub const ALL: [Unit; 10] = [
        Unit::MgPerKg,
        Unit::UgPerG,
        Unit::Ppm,
        Unit::Ppb,
        Unit::UgPerKg,
        Unit::Percent,
        Unit::UgPerL,
        Unit::MgPerL,
        Unit::NgPerMl,
        Unit::UgPerMl,
    ];

    /// Accepts the usual spellings: `u` for the micro sign, either micro
    /// code point (U+00B5, U+03BC), and `l` or `L` for litre.
    pub fn parse(text: &str) -> Option<Unit> {
        let text = text.trim();
        // Exact canonical spellings first: no allocation on the common path.
        if let Some(u) = Unit::ALL.into_iter().find(|u| u.symbol() == text) {
            return Some(u);
        }
        let t: String = text
            .trim()
            .chars()
            .map(|c| match c {
                '\u{00B5}' | '\u{03BC}' => 'u',
                c => c.to_ascii_lowercase(),
            })
            .collect();
        Some(match t.as_str() {
            "mg/kg" => Unit::MgPerKg,
            "ug/g" => Unit::UgPerG,
            "ppm" => Unit::Ppm,
            "ppb" => Unit::Ppb,
            "ug/kg" => Unit::UgPerKg,
            // Unreachable after the exact match above ("%" has no case);
            // kept so the table lists every unit.
            "%" => Unit::Percent,
            "ug/l" => Unit::UgPerL,
            "mg/l" => Unit::MgPerL,
            "ng/ml" => Unit::NgPerMl,
            "ug/ml" => Unit::UgPerMl,
            _ => return None,
        })
    }

    pub fn symbol(self) -> &'static str {
        match self {
            Unit::MgPerKg => "mg/kg",
            Unit::UgPerG => "µg/g",
            Unit::Ppm => "ppm",
            Unit::Ppb => "ppb",
            Unit::UgPerKg => "µg/kg",
            Unit::Percent => "%",
            Unit::UgPerL => "µg/L",
            Unit::MgPerL => "mg/L",
            Unit::NgPerMl => "ng/mL",
            Unit::UgPerMl => "µg/mL",
        }
    }

    pub fn dimension(self) -> Dimension {
        match self {
            Unit::MgPerKg
            | Unit::UgPerG
            | Unit::Ppm
            | Unit::Ppb
            | Unit::UgPerKg
            | Unit::Percent => Dimension::MassFraction,
            _ => Dimension::MassConcentration,
        }
    }

    /// How many base units (mg/kg or µg/L) one of this unit is.
    pub fn base_factor(self) -> Decimal {
        match self {
            Unit::MgPerKg | Unit::UgPerG | Unit::Ppm => Decimal::ONE,
            Unit::Ppb | Unit::UgPerKg => Decimal::new(1, 3),
            Unit::Percent => Decimal::new(10_000, 0),
            Unit::UgPerL | Unit::NgPerMl => Decimal::ONE,
            Unit::MgPerL | Unit::UgPerMl => Decimal::new(1000, 0),
        }
    }

    /// The spellings `parse` accepts, for error hints.
    pub fn accepted() -> String {
        "mg/kg, ug/g (µg/g), ppm, ppb, ug/kg (µg/kg), %, ug/L (µg/L), mg/L, ng/mL, ug/mL (µg/mL)"
            .into()
    }
}

impl fmt::Display for Unit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

/// Converts within one dimension; None across dimensions (or for a value
/// too large to convert, which no measurement is).
pub fn convert(value: Decimal, from: Unit, to: Unit) -> Option<Decimal> {
    if from.dimension() != to.dimension() {
        return None;
    }
    if from == to || from.base_factor() == to.base_factor() {
        return Some(value);
    }
    value
        .checked_mul(from.base_factor())?
        .checked_div(to.base_factor())
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::str::FromStr;

    fn d(s: &str) -> Decimal {
        Decimal::from_str(s).unwrap()
    }

    // SI prefixes (BIPM SI Brochure, 9th ed., Table 7): milli 1e-3, micro 1e-6, nano 1e-9.
    // 1 mg/kg = 1e-6 kg/kg; 1 µg/kg = 1e-9; 1 % = 1e-2 = 10 000 mg/kg.
    #[test]
    fn mass_fraction_factors_follow_si_prefixes() {
        assert_eq!(
            convert(d("1"), Unit::Percent, Unit::MgPerKg),
            Some(d("10000"))
        );
        assert_eq!(
            convert(d("0.009"), Unit::Percent, Unit::MgPerKg),
            Some(d("90"))
        );
        assert_eq!(convert(d("1"), Unit::UgPerG, Unit::MgPerKg), Some(d("1")));
        assert_eq!(convert(d("1"), Unit::Ppm, Unit::MgPerKg), Some(d("1")));
        assert_eq!(
            convert(d("1000"), Unit::UgPerKg, Unit::MgPerKg),
            Some(d("1"))
        );
        assert_eq!(convert(d("250"), Unit::Ppb, Unit::UgPerKg), Some(d("250")));
        assert_eq!(
            convert(d("500"), Unit::MgPerKg, Unit::Percent),
            Some(d("0.05"))
        );
    }

    // SI: 1 µg/mL = 1e-6 g / 1e-3 L = 1 mg/L = 1000 µg/L; 1 ng/mL = 1 µg/L.
    #[test]
    fn mass_concentration_factors_follow_si_prefixes() {
        assert_eq!(
            convert(d("1"), Unit::UgPerMl, Unit::UgPerL),
            Some(d("1000"))
        );
        assert_eq!(
            convert(d("3.0"), Unit::UgPerMl, Unit::MgPerL),
            Some(d("3.0"))
        );
        assert_eq!(convert(d("7"), Unit::NgPerMl, Unit::UgPerL), Some(d("7")));
        assert_eq!(
            convert(d("2500"), Unit::UgPerL, Unit::MgPerL),
            Some(d("2.5"))
        );
    }

    #[test]
    fn dimensions_do_not_mix() {
        assert_eq!(convert(d("1"), Unit::MgPerL, Unit::MgPerKg), None);
    }

    #[test]
    fn overflow_is_not_a_panic() {
        assert_eq!(convert(Decimal::MAX, Unit::Percent, Unit::MgPerKg), None);
    }

    #[test]
    fn spellings() {
        assert_eq!(Unit::parse("µg/L"), Some(Unit::UgPerL));
        assert_eq!(Unit::parse("\u{03BC}g/l"), Some(Unit::UgPerL));
        assert_eq!(Unit::parse(" ug/g "), Some(Unit::UgPerG));
        assert_eq!(Unit::parse("PPM"), Some(Unit::Ppm));
        assert_eq!(Unit::parse("mg/g"), None);
        for u in Unit::ALL {
            assert_eq!(Unit::parse(u.symbol()), Some(u));
        }
    }

    // Every unit reads back from the symbol it prints, and the hint lists
    // exactly the spellings that parse (common practice, no source).
    #[test]
    fn symbols_parse_back_and_the_hint_lists_every_spelling() {
        for unit in Unit::ALL {
            assert_eq!(Unit::parse(unit.symbol()), Some(unit), "{unit}");
            assert_eq!(unit.to_string(), unit.symbol());
        }
        let hint = Unit::accepted();
        let spellings: Vec<&str> = hint
            .split(", ")
            .flat_map(|s| s.split(" ("))
            .map(|s| s.trim_end_matches(')'))
            .collect();
        assert!(spellings.len() >= Unit::ALL.len(), "{hint}");
        for s in &spellings {
            assert!(
                Unit::parse(s).is_some(),
                "hint lists `{s}`, which does not parse"
            );
        }
        for unit in Unit::ALL {
            assert!(
                spellings.iter().any(|s| Unit::parse(s) == Some(unit)),
                "hint omits {unit}"
            );
        }
        for (text, unit) in [
            ("ug/mL", Unit::UgPerMl),
            ("UG/ML", Unit::UgPerMl),
            ("MG/KG", Unit::MgPerKg),
            ("UG/G", Unit::UgPerG),
            ("PPM", Unit::Ppm),
            ("PPB", Unit::Ppb),
            ("UG/KG", Unit::UgPerKg),
            ("\u{03BC}g/kg", Unit::UgPerKg),
            ("ug/l", Unit::UgPerL),
            ("MG/L", Unit::MgPerL),
            ("NG/ML", Unit::NgPerMl),
            (" mg/l ", Unit::MgPerL),
        ] {
            assert_eq!(Unit::parse(text), Some(unit), "`{text}`");
        }
        assert_eq!(Unit::parse("mg/g"), None);
    }

    // Units with the same factor convert without arithmetic, so the digits
    // the value was given with are kept: 2.50 mg/L is 2.50 µg/mL.
    #[test]
    fn equal_factors_keep_the_given_digits() {
        let c = convert(d("2.50"), Unit::MgPerL, Unit::UgPerMl).unwrap();
        assert_eq!(c.to_string(), "2.50");
        let c = convert(d("0.600"), Unit::Ppm, Unit::UgPerG).unwrap();
        assert_eq!(c.to_string(), "0.600");
        // Even the largest decimal converts, as no arithmetic is done.
        assert_eq!(
            convert(Decimal::MAX, Unit::MgPerL, Unit::UgPerMl),
            Some(Decimal::MAX)
        );
    }
}
