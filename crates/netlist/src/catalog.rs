//! The element kinds a circuit file can instantiate: their pins, their parameters (with the
//! dimension each must have) and how to build the engine's element from them.

use crate::units::Dim;
use lamina_devices::{Polarity, SquareLawFet};
use lamina_engine::elements::{
    Capacitor, CurrentSource, Inductor, Resistor, Vccs, Vcvs, VoltageSource, Waveform,
};
use lamina_engine::Element;

/// A parameter of an element kind.
#[derive(Clone, Copy, Debug)]
pub struct ParamSpec {
    /// Name in circuit files.
    pub name: &'static str,
    /// Dimension its value must have.
    pub dim: Dim,
    /// Default in SI units, or `None` if it must be given.
    pub default: Option<f64>,
    /// Whether the value must be positive.
    pub positive: bool,
    /// Whether it takes a waveform (`pulse(...)`, `pwl(...)`, `sine(...)`).
    pub waveform: bool,
}

const fn req(name: &'static str, dim: Dim) -> ParamSpec {
    ParamSpec {
        name,
        dim,
        default: None,
        positive: true,
        waveform: false,
    }
}

const fn opt(name: &'static str, dim: Dim, default: f64) -> ParamSpec {
    ParamSpec {
        name,
        dim,
        default: Some(default),
        positive: false,
        waveform: false,
    }
}

const fn wave(name: &'static str, dim: Dim) -> ParamSpec {
    ParamSpec {
        name,
        dim,
        default: None,
        positive: false,
        waveform: true,
    }
}

/// Parameter values handed to a builder, in the order of the kind's specs.
pub struct Values {
    /// Numbers in SI units (`NaN` for an absent optional waveform parameter).
    pub numbers: Vec<f64>,
    /// The waveform, if the kind has a waveform parameter and it was given.
    pub waveform: Option<Waveform>,
}

/// An element kind.
pub struct Kind {
    /// Name in circuit files.
    pub name: &'static str,
    /// Short description for summaries and help.
    pub about: &'static str,
    /// Terminal names, in the engine element's order.
    pub terminals: &'static [&'static str],
    /// Parameters.
    pub params: &'static [ParamSpec],
    /// Builds the element.
    pub build: fn(&Values) -> Box<dyn Element>,
}

fn source_wave(v: &Values) -> Waveform {
    v.waveform
        .clone()
        .unwrap_or(Waveform::Constant(v.numbers[0]))
}

/// Every element kind, in the order the language reference lists them.
pub static KINDS: &[Kind] = &[
    Kind {
        name: "resistor",
        about: "linear resistor",
        terminals: &["a", "b"],
        params: &[req("resistance", Dim::RESISTANCE)],
        build: |v| Box::new(Resistor::new(v.numbers[0])),
    },
    Kind {
        name: "capacitor",
        about: "linear capacitor",
        terminals: &["a", "b"],
        params: &[req("capacitance", Dim::CAPACITANCE)],
        build: |v| Box::new(Capacitor::new(v.numbers[0])),
    },
    Kind {
        name: "inductor",
        about: "linear inductor",
        terminals: &["a", "b"],
        params: &[req("inductance", Dim::INDUCTANCE)],
        build: |v| Box::new(Inductor::new(v.numbers[0])),
    },
    Kind {
        name: "voltage_source",
        about: "independent voltage source",
        terminals: &["pos", "neg"],
        params: &[opt("dc", Dim::VOLTAGE, 0.0), wave("wave", Dim::VOLTAGE)],
        build: |v| Box::new(VoltageSource::new(source_wave(v))),
    },
    Kind {
        name: "current_source",
        about: "independent current source (drives current out of `pos`)",
        terminals: &["pos", "neg"],
        params: &[opt("dc", Dim::CURRENT, 0.0), wave("wave", Dim::CURRENT)],
        build: |v| Box::new(CurrentSource::new(source_wave(v))),
    },
    Kind {
        name: "vcvs",
        about: "voltage-controlled voltage source",
        terminals: &["out_pos", "out_neg", "ctrl_pos", "ctrl_neg"],
        params: &[ParamSpec {
            positive: false,
            ..req("gain", Dim::NONE)
        }],
        build: |v| Box::new(Vcvs::new(v.numbers[0])),
    },
    Kind {
        name: "vccs",
        about: "voltage-controlled current source",
        terminals: &["out_pos", "out_neg", "ctrl_pos", "ctrl_neg"],
        params: &[ParamSpec {
            positive: false,
            ..req("transconductance", Dim::CONDUCTANCE)
        }],
        build: |v| Box::new(Vccs::new(v.numbers[0])),
    },
    Kind {
        name: "square_nfet",
        about: "square-law n-channel reference FET",
        terminals: &["drain", "gate", "source"],
        params: &[
            req("k", Dim::TRANSCONDUCTANCE_PARAMETER),
            ParamSpec {
                positive: false,
                ..req("threshold", Dim::VOLTAGE)
            },
            opt("length_modulation", Dim::PER_VOLT, 0.0),
            opt("gate_capacitance", Dim::CAPACITANCE, 0.0),
        ],
        build: |v| Box::new(square(Polarity::N, v)),
    },
    Kind {
        name: "square_pfet",
        about: "square-law p-channel reference FET (threshold negative)",
        terminals: &["drain", "gate", "source"],
        params: &[
            req("k", Dim::TRANSCONDUCTANCE_PARAMETER),
            ParamSpec {
                positive: false,
                ..req("threshold", Dim::VOLTAGE)
            },
            opt("length_modulation", Dim::PER_VOLT, 0.0),
            opt("gate_capacitance", Dim::CAPACITANCE, 0.0),
        ],
        build: |v| Box::new(square(Polarity::P, v)),
    },
];

fn square(p: Polarity, v: &Values) -> SquareLawFet {
    SquareLawFet::new(p, v.numbers[0], v.numbers[1])
        .with_length_modulation(v.numbers[2])
        .with_gate_capacitance(v.numbers[3])
}

/// The kind called `name`.
pub fn kind(name: &str) -> Option<&'static Kind> {
    KINDS.iter().find(|k| k.name == name)
}
