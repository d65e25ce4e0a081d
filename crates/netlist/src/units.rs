//! Physical dimensions and unit symbols.
//!
//! A dimension is a vector of integer exponents over (metre, second, volt, ampere, kelvin),
//! the base that suits circuits: a farad is `A s / V`, an ohm `V / A`, an electron-volt an
//! energy `V A s` scaled by the elementary charge. Unit symbols take one SI prefix
//! (`f p n u µ m c k M G T`); `c` is allowed only on metres (`cm`).

use std::fmt;

/// Integer exponents of (m, s, V, A, K).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default)]
pub struct Dim(pub [i8; 5]);

impl Dim {
    /// A pure number.
    pub const NONE: Dim = Dim([0; 5]);
    /// Metre.
    pub const LENGTH: Dim = Dim([1, 0, 0, 0, 0]);
    /// Second.
    pub const TIME: Dim = Dim([0, 1, 0, 0, 0]);
    /// Volt.
    pub const VOLTAGE: Dim = Dim([0, 0, 1, 0, 0]);
    /// Ampere.
    pub const CURRENT: Dim = Dim([0, 0, 0, 1, 0]);
    /// Kelvin.
    pub const TEMPERATURE: Dim = Dim([0, 0, 0, 0, 1]);
    /// Ohm.
    pub const RESISTANCE: Dim = Dim([0, 0, 1, -1, 0]);
    /// Siemens.
    pub const CONDUCTANCE: Dim = Dim([0, 0, -1, 1, 0]);
    /// Farad.
    pub const CAPACITANCE: Dim = Dim([0, 1, -1, 1, 0]);
    /// Henry.
    pub const INDUCTANCE: Dim = Dim([0, 1, 1, -1, 0]);
    /// Hertz.
    pub const FREQUENCY: Dim = Dim([0, -1, 0, 0, 0]);
    /// A/V² (transconductance parameter of a square-law device).
    pub const TRANSCONDUCTANCE_PARAMETER: Dim = Dim([0, 0, -2, 1, 0]);
    /// 1/V.
    pub const PER_VOLT: Dim = Dim([0, 0, -1, 0, 0]);

    /// Product of two dimensions.
    pub fn times(self, o: Dim) -> Dim {
        let mut d = [0i8; 5];
        for (i, v) in d.iter_mut().enumerate() {
            *v = self.0[i].saturating_add(o.0[i]);
        }
        Dim(d)
    }

    /// Quotient of two dimensions.
    pub fn per(self, o: Dim) -> Dim {
        self.times(o.pow(-1))
    }

    /// Integer power.
    pub fn pow(self, k: i32) -> Dim {
        let mut d = [0i8; 5];
        for (i, v) in d.iter_mut().enumerate() {
            *v = (self.0[i] as i32 * k).clamp(-100, 100) as i8;
        }
        Dim(d)
    }

    /// Square root, if every exponent is even.
    pub fn sqrt(self) -> Option<Dim> {
        if self.0.iter().all(|e| e % 2 == 0) {
            let mut d = self.0;
            for v in &mut d {
                *v /= 2;
            }
            Some(Dim(d))
        } else {
            None
        }
    }

    /// A value written with a unit of this dimension, for help messages.
    pub fn example(self) -> String {
        let named = [
            (Dim::NONE, "2"),
            (Dim::LENGTH, "50 nm"),
            (Dim::TIME, "10 ps"),
            (Dim::VOLTAGE, "0.8 V"),
            (Dim::CURRENT, "10 uA"),
            (Dim::TEMPERATURE, "300 K"),
            (Dim::RESISTANCE, "10 kOhm"),
            (Dim::CONDUCTANCE, "1 mS"),
            (Dim::CAPACITANCE, "1 fF"),
            (Dim::INDUCTANCE, "1 nH"),
            (Dim::FREQUENCY, "1 GHz"),
            (Dim::TRANSCONDUCTANCE_PARAMETER, "100 uA/V^2"),
            (Dim::PER_VOLT, "0.1 /V"),
        ];
        named
            .iter()
            .find(|(d, _)| *d == self)
            .map_or_else(|| format!("1 {self}"), |(_, e)| e.to_string())
    }

    /// A plain-words name for common dimensions, for messages.
    pub fn describe(self) -> String {
        let named = [
            (Dim::NONE, "a pure number"),
            (Dim::LENGTH, "a length (m)"),
            (Dim::TIME, "a time (s)"),
            (Dim::VOLTAGE, "a voltage (V)"),
            (Dim::CURRENT, "a current (A)"),
            (Dim::TEMPERATURE, "a temperature (K)"),
            (Dim::RESISTANCE, "a resistance (Ohm)"),
            (Dim::CONDUCTANCE, "a conductance (S)"),
            (Dim::CAPACITANCE, "a capacitance (F)"),
            (Dim::INDUCTANCE, "an inductance (H)"),
            (Dim::FREQUENCY, "a frequency (Hz)"),
            (
                Dim::TRANSCONDUCTANCE_PARAMETER,
                "a transconductance parameter (A/V^2)",
            ),
            (Dim::PER_VOLT, "an inverse voltage (1/V)"),
        ];
        for (d, name) in named {
            if d == self {
                return name.to_string();
            }
        }
        format!("a quantity in {self}")
    }
}

impl fmt::Display for Dim {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let names = ["m", "s", "V", "A", "K"];
        let mut parts = Vec::new();
        for (i, &e) in self.0.iter().enumerate() {
            match e {
                0 => {}
                1 => parts.push(names[i].to_string()),
                e => parts.push(format!("{}^{e}", names[i])),
            }
        }
        if parts.is_empty() {
            f.write_str("1")
        } else {
            f.write_str(&parts.join(" "))
        }
    }
}

/// Elementary charge in coulombs (CODATA 2018, exact by the 2019 SI definition).
const ELEMENTARY_CHARGE: f64 = 1.602_176_634e-19;

const BASES: &[(&str, f64, Dim)] = &[
    ("m", 1.0, Dim::LENGTH),
    ("s", 1.0, Dim::TIME),
    ("V", 1.0, Dim::VOLTAGE),
    ("A", 1.0, Dim::CURRENT),
    ("K", 1.0, Dim::TEMPERATURE),
    ("F", 1.0, Dim::CAPACITANCE),
    ("Ohm", 1.0, Dim::RESISTANCE),
    ("ohm", 1.0, Dim::RESISTANCE),
    ("Ω", 1.0, Dim::RESISTANCE),
    ("S", 1.0, Dim::CONDUCTANCE),
    ("H", 1.0, Dim::INDUCTANCE),
    ("C", 1.0, Dim([0, 1, 0, 1, 0])),
    ("J", 1.0, Dim([0, 1, 1, 1, 0])),
    ("W", 1.0, Dim([0, 0, 1, 1, 0])),
    ("Hz", 1.0, Dim::FREQUENCY),
    ("eV", ELEMENTARY_CHARGE, Dim([0, 1, 1, 1, 0])),
];

const PREFIXES: &[(&str, f64)] = &[
    ("f", 1e-15),
    ("p", 1e-12),
    ("n", 1e-9),
    ("u", 1e-6),
    ("µ", 1e-6),
    ("m", 1e-3),
    ("c", 1e-2),
    ("k", 1e3),
    ("M", 1e6),
    ("G", 1e9),
    ("T", 1e12),
];

/// The scale to SI and the dimension of a unit symbol such as `fF`, `cm` or `kOhm`.
pub fn unit_atom(symbol: &str) -> Option<(f64, Dim)> {
    if let Some(&(_, scale, dim)) = BASES.iter().find(|(s, _, _)| *s == symbol) {
        return Some((scale, dim));
    }
    for &(p, factor) in PREFIXES {
        if let Some(rest) = symbol.strip_prefix(p) {
            if p == "c" && rest != "m" {
                continue;
            }
            if let Some(&(_, scale, dim)) = BASES.iter().find(|(s, _, _)| *s == rest) {
                return Some((factor * scale, dim));
            }
        }
    }
    None
}

/// Every unit symbol without prefix, for "did you mean" suggestions.
pub fn base_symbols() -> impl Iterator<Item = &'static str> {
    BASES.iter().map(|b| b.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixed_units() {
        assert_eq!(unit_atom("fF"), Some((1e-15, Dim::CAPACITANCE)));
        assert_eq!(unit_atom("cm"), Some((1e-2, Dim::LENGTH)));
        assert_eq!(unit_atom("kOhm"), Some((1e3, Dim::RESISTANCE)));
        assert_eq!(unit_atom("m"), Some((1.0, Dim::LENGTH)));
        assert_eq!(unit_atom("ms"), Some((1e-3, Dim::TIME)));
        assert!(unit_atom("cV").is_none());
        assert!(unit_atom("out").is_none());
        let (s, d) = unit_atom("meV").unwrap();
        assert!((s - 1.602176634e-22).abs() < 1e-35);
        assert_eq!(d, Dim([0, 1, 1, 1, 0]));
    }
}
