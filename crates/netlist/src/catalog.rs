//! The element kinds a circuit file can instantiate: their pins, their parameters (with the
//! dimension each must have) and how to build the engine's element from them.

use crate::units::Dim;
use lamina_devices::mobility::{DensityDependence, LatticeModel};
use lamina_devices::sheet_fet::leakage::Barrier;
use lamina_devices::sheet_fet::traps::{trap_key, MAX_TRAP_GROUPS};
use lamina_devices::sheet_fet::valley_key;
use lamina_devices::sheet_fet::{TrapGroup, TrapKind};
use lamina_devices::{
    materials, ContactCard, ExtraValley, Gate, Layer, Polarity, SheetFet, SheetFetCard,
    SquareLawFet,
};
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
    /// Whether it takes a name (a material from the library) instead of a number.
    pub text: bool,
}

const fn req(name: &'static str, dim: Dim) -> ParamSpec {
    ParamSpec {
        name,
        dim,
        default: None,
        positive: true,
        waveform: false,
        text: false,
    }
}

const fn opt(name: &'static str, dim: Dim, default: f64) -> ParamSpec {
    ParamSpec {
        name,
        dim,
        default: Some(default),
        positive: false,
        waveform: false,
        text: false,
    }
}

const fn wave(name: &'static str, dim: Dim) -> ParamSpec {
    ParamSpec {
        name,
        dim,
        default: None,
        positive: false,
        waveform: true,
        text: false,
    }
}

/// A parameter that may be left out: the builder sees whether it was given.
const fn maybe(name: &'static str, dim: Dim) -> ParamSpec {
    ParamSpec {
        name,
        dim,
        default: Some(f64::NAN),
        positive: false,
        waveform: false,
        text: false,
    }
}

const fn named(name: &'static str) -> ParamSpec {
    ParamSpec {
        name,
        dim: Dim::NONE,
        default: Some(f64::NAN),
        positive: false,
        waveform: false,
        text: true,
    }
}

/// Parameter values handed to a builder, in the order of the kind's specs.
pub struct Values {
    /// Numbers in SI units (`NaN` for waveform and name parameters, and for optional numbers
    /// that were not given).
    pub numbers: Vec<f64>,
    /// Whether each number was given (by the device card or the instance).
    pub given: Vec<bool>,
    /// Name-valued parameters.
    pub texts: Vec<Option<String>>,
    /// The waveform, if the kind has a waveform parameter and it was given.
    pub waveform: Option<Waveform>,
}

impl Values {
    fn get(&self, specs: &[ParamSpec], name: &str) -> Option<f64> {
        let i = specs.iter().position(|p| p.name == name)?;
        self.given[i].then_some(self.numbers[i])
    }

    fn text(&self, specs: &[ParamSpec], name: &str) -> Option<&str> {
        let i = specs.iter().position(|p| p.name == name)?;
        self.texts[i].as_deref()
    }

    /// Whether a number or a name was given for `name`.
    fn has(&self, specs: &[ParamSpec], name: &str) -> bool {
        self.get(specs, name).is_some() || self.text(specs, name).is_some()
    }

    /// Refuses `a` and `b` given together (one would silently win), at `b`, with `help`.
    fn exclusive(
        &self,
        specs: &[ParamSpec],
        a: &str,
        b: &str,
        help: impl Into<String>,
    ) -> Result<(), BuildError> {
        if self.has(specs, a) && self.has(specs, b) {
            Err(BuildError::at(
                b,
                format!("`{a}` and `{b}` are both given; one would silently win"),
                help,
            ))
        } else {
            Ok(())
        }
    }
}

/// Why a kind's parameter values do not make an element.
#[derive(Clone, Debug, PartialEq)]
pub struct BuildError {
    /// The parameter at fault, if one is (its name in circuit files).
    pub param: Option<String>,
    /// What is wrong.
    pub message: String,
    /// What to change, if known.
    pub help: Option<String>,
}

impl BuildError {
    /// An error about `param`.
    pub fn at(param: &str, message: impl Into<String>, help: impl Into<String>) -> Self {
        BuildError {
            param: Some(param.to_string()),
            message: message.into(),
            help: Some(help.into()),
        }
    }
}

impl From<String> for BuildError {
    /// A message from a device model or the material library; the first name in backticks
    /// that is a parameter of the model (`temperature`, ...) or a material setting locates it.
    fn from(message: String) -> Self {
        let param = message
            .split('`')
            .skip(1)
            .step_by(2)
            .find(|w| SHEET_PARAMS.iter().any(|p| p.name == *w))
            .map(str::to_string);
        BuildError {
            param,
            message,
            help: None,
        }
    }
}

impl From<&str> for BuildError {
    fn from(message: &str) -> Self {
        BuildError::from(message.to_string())
    }
}

/// A cheap check of a card's values (see [`Kind::check`]).
pub type CheckFn = fn(&Values) -> Result<(), BuildError>;

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
    /// Builds the element, or says why the values do not make one.
    pub build: fn(&Values) -> Result<Box<dyn Element>, BuildError>,
    /// Checks a device card's values without building the element (cheap, no tables), so
    /// that a card's faults are reported once, at the card.
    pub check: Option<CheckFn>,
}

fn source_wave(v: &Values) -> Result<Waveform, BuildError> {
    match &v.waveform {
        Some(_) if v.given[0] => Err(BuildError::at(
            "dc",
            "`dc` and `wave` are both given; a source has one value",
            "keep `wave` for a time-varying source, or `dc` for a constant one",
        )),
        Some(w) => Ok(w.clone()),
        None => Ok(Waveform::Constant(v.numbers[0])),
    }
}

/// Parameters of both square-law reference FETs.
static SQUARE_PARAMS: &[ParamSpec] = &[
    req("k", Dim::TRANSCONDUCTANCE_PARAMETER),
    ParamSpec {
        positive: false,
        ..req("threshold", Dim::VOLTAGE)
    },
    opt("length_modulation", Dim::PER_VOLT, 0.0),
    opt("gate_capacitance", Dim::CAPACITANCE, 0.0),
];

/// Every element kind, in the order the language reference lists them.
pub static KINDS: &[Kind] = &[
    Kind {
        name: "resistor",
        about: "linear resistor",
        terminals: &["a", "b"],
        params: &[req("resistance", Dim::RESISTANCE)],
        build: |v| Ok(Box::new(Resistor::new(v.numbers[0]))),
        check: None,
    },
    Kind {
        name: "capacitor",
        about: "linear capacitor",
        terminals: &["a", "b"],
        params: &[req("capacitance", Dim::CAPACITANCE)],
        build: |v| Ok(Box::new(Capacitor::new(v.numbers[0]))),
        check: None,
    },
    Kind {
        name: "inductor",
        about: "linear inductor",
        terminals: &["a", "b"],
        params: &[req("inductance", Dim::INDUCTANCE)],
        build: |v| Ok(Box::new(Inductor::new(v.numbers[0]))),
        check: None,
    },
    Kind {
        name: "voltage_source",
        about: "independent voltage source",
        terminals: &["pos", "neg"],
        params: &[opt("dc", Dim::VOLTAGE, 0.0), wave("wave", Dim::VOLTAGE)],
        build: |v| Ok(Box::new(VoltageSource::new(source_wave(v)?))),
        check: None,
    },
    Kind {
        name: "current_source",
        about: "independent current source (drives current out of `pos`)",
        terminals: &["pos", "neg"],
        params: &[opt("dc", Dim::CURRENT, 0.0), wave("wave", Dim::CURRENT)],
        build: |v| Ok(Box::new(CurrentSource::new(source_wave(v)?))),
        check: None,
    },
    Kind {
        name: "vcvs",
        about: "voltage-controlled voltage source",
        terminals: &["out_pos", "out_neg", "ctrl_pos", "ctrl_neg"],
        params: &[ParamSpec {
            positive: false,
            ..req("gain", Dim::NONE)
        }],
        build: |v| Ok(Box::new(Vcvs::new(v.numbers[0]))),
        check: None,
    },
    Kind {
        name: "vccs",
        about: "voltage-controlled current source",
        terminals: &["out_pos", "out_neg", "ctrl_pos", "ctrl_neg"],
        params: &[ParamSpec {
            positive: false,
            ..req("transconductance", Dim::CONDUCTANCE)
        }],
        build: |v| Ok(Box::new(Vccs::new(v.numbers[0]))),
        check: None,
    },
    Kind {
        name: "square_nfet",
        about: "square-law n-channel reference FET",
        terminals: &["drain", "gate", "source"],
        params: SQUARE_PARAMS,
        build: |v| Ok(Box::new(square(Polarity::N, v))),
        check: None,
    },
    Kind {
        name: "square_pfet",
        about: "square-law p-channel reference FET (threshold negative)",
        terminals: &["drain", "gate", "source"],
        params: SQUARE_PARAMS,
        build: |v| Ok(Box::new(square(Polarity::P, v))),
        check: None,
    },
    Kind {
        name: "sheet_fet",
        about: "2D-channel FET (Fermi-Dirac charge sheet, Ward-Dutton charges)",
        terminals: &["drain", "gate", "source"],
        params: SHEET_PARAMS,
        build: |v| Ok(Box::new(SheetFet::new(&sheet_card(v)?)?)),
        check: Some(|v| sheet_card(v).map(|_| ())),
    },
];

const ENERGY: Dim = Dim::ENERGY;
const PER_AREA: Dim = Dim::PER_AREA;
const PER_ENERGY_AREA: Dim = Dim::PER_ENERGY_AREA;
const MOBILITY: Dim = Dim::MOBILITY;
const VELOCITY: Dim = Dim::VELOCITY;
const RESISTANCE_WIDTH: Dim = Dim::RESISTANCE_WIDTH;
const CAPACITANCE_PER_WIDTH: Dim = Dim::CAPACITANCE_PER_WIDTH;

/// Parameters of the 2D-channel FET. Names (materials) first, then numbers; any number given
/// overrides the library value of the named material.
static SHEET_PARAMS: &[ParamSpec] = &[
    named("channel"),
    named("gate"),
    named("insulator"),
    named("insulator2"),
    named("transport_direction"),
    named("mobility_model"),
    maybe("insulator_layers", Dim::NONE),
    maybe("insulator_thickness", Dim::LENGTH),
    maybe("insulator_permittivity", Dim::NONE),
    maybe("insulator2_layers", Dim::NONE),
    maybe("insulator2_thickness", Dim::LENGTH),
    maybe("insulator2_permittivity", Dim::NONE),
    maybe("insulator_electron_affinity", ENERGY),
    maybe("insulator_band_gap", ENERGY),
    maybe("insulator_electron_tunnelling_mass", Dim::NONE),
    maybe("insulator_hole_tunnelling_mass", Dim::NONE),
    maybe("insulator2_electron_affinity", ENERGY),
    maybe("insulator2_band_gap", ENERGY),
    maybe("insulator2_electron_tunnelling_mass", Dim::NONE),
    maybe("insulator2_hole_tunnelling_mass", Dim::NONE),
    named("gate_leakage"),
    maybe("gate_leakage_fraction", Dim::NONE),
    maybe("gate_work_function", ENERGY),
    maybe("gate_fermi_velocity", VELOCITY),
    maybe("gate_half_gap", ENERGY),
    maybe("gate_gap_shift", Dim::NONE),
    maybe("gate_degeneracy", Dim::NONE),
    maybe("gate_residual_density", PER_AREA),
    maybe("electron_mass", Dim::NONE),
    maybe("hole_mass", Dim::NONE),
    maybe("electron_degeneracy", Dim::NONE),
    maybe("hole_degeneracy", Dim::NONE),
    maybe("band_gap", ENERGY),
    maybe("electron_affinity", ENERGY),
    maybe("donor_density", PER_AREA),
    maybe("acceptor_density", PER_AREA),
    maybe("valley_offset", ENERGY),
    maybe("valley_mass", Dim::NONE),
    maybe("valley_degeneracy", Dim::NONE),
    maybe("valley2_offset", ENERGY),
    maybe("valley2_mass", Dim::NONE),
    maybe("valley2_degeneracy", Dim::NONE),
    maybe("trap_density", PER_ENERGY_AREA),
    maybe("trap_neutral_level", ENERGY),
    maybe("trap1_density", PER_AREA),
    maybe("trap1_level", ENERGY),
    named("trap1_type"),
    maybe("trap1_time", Dim::TIME),
    maybe("trap1_decades", Dim::NONE),
    maybe("trap1_states", Dim::NONE),
    maybe("trap1_depth", Dim::LENGTH),
    maybe("trap1_decay_length", Dim::LENGTH),
    maybe("trap2_density", PER_AREA),
    maybe("trap2_level", ENERGY),
    named("trap2_type"),
    maybe("trap2_time", Dim::TIME),
    maybe("trap2_decades", Dim::NONE),
    maybe("trap2_states", Dim::NONE),
    maybe("trap2_depth", Dim::LENGTH),
    maybe("trap2_decay_length", Dim::LENGTH),
    maybe("trap3_density", PER_AREA),
    maybe("trap3_level", ENERGY),
    named("trap3_type"),
    maybe("trap3_time", Dim::TIME),
    maybe("trap3_decades", Dim::NONE),
    maybe("trap3_states", Dim::NONE),
    maybe("trap3_depth", Dim::LENGTH),
    maybe("trap3_decay_length", Dim::LENGTH),
    maybe("fixed_charge_density", PER_AREA),
    maybe("temperature", Dim::TEMPERATURE),
    maybe("width", Dim::LENGTH),
    maybe("length", Dim::LENGTH),
    maybe("electron_mobility", MOBILITY),
    maybe("hole_mobility", MOBILITY),
    maybe("saturation_velocity", VELOCITY),
    maybe("saturation_exponent", Dim::NONE),
    maybe("source_resistance", RESISTANCE_WIDTH),
    maybe("drain_resistance", RESISTANCE_WIDTH),
    maybe("overlap_capacitance", CAPACITANCE_PER_WIDTH),
    maybe("electron_mass_along", Dim::NONE),
    maybe("electron_mass_across", Dim::NONE),
    maybe("hole_mass_along", Dim::NONE),
    maybe("hole_mass_across", Dim::NONE),
    maybe("mobility_reference_temperature", Dim::TEMPERATURE),
    maybe("electron_mobility_exponent", Dim::NONE),
    maybe("hole_mobility_exponent", Dim::NONE),
    maybe("electron_deformation_potential", ENERGY),
    maybe("hole_deformation_potential", ENERGY),
    maybe("elastic_modulus", Dim::ENERGY_PER_AREA),
    maybe("electron_impurity_mobility", MOBILITY),
    maybe("hole_impurity_mobility", MOBILITY),
    maybe("electron_mobility_density_reference", PER_AREA),
    maybe("hole_mobility_density_reference", PER_AREA),
    maybe("electron_mobility_density_exponent", Dim::NONE),
    maybe("hole_mobility_density_exponent", Dim::NONE),
    named("contact_metal"),
    maybe("contact_work_function", ENERGY),
    maybe("contact_pinning", Dim::NONE),
    maybe("contact_neutral_level", ENERGY),
    maybe("contact_electron_barrier", ENERGY),
    maybe("contact_hole_barrier", ENERGY),
    maybe("contact_screening_length", Dim::LENGTH),
    maybe("channel_thickness", Dim::LENGTH),
    maybe("channel_permittivity", Dim::NONE),
    maybe("natural_length", Dim::LENGTH),
];

/// The values `mobility_model` takes.
const MOBILITY_MODELS: &[(&str, LatticeModel)] = &[
    ("power_law", LatticeModel::PowerLaw),
    ("acoustic_phonon", LatticeModel::AcousticPhonon),
];

/// Settings of the power-law mobility, unused by the acoustic-phonon model.
const POWER_LAW_SETTINGS: &[&str] = &[
    "electron_mobility",
    "hole_mobility",
    "mobility_reference_temperature",
    "electron_mobility_exponent",
    "hole_mobility_exponent",
];

/// Inputs of the acoustic-phonon mobility, unused by the power law.
const PHONON_SETTINGS: &[&str] = &[
    "electron_deformation_potential",
    "hole_deformation_potential",
    "elastic_modulus",
];

/// The card's `mobility_model`, or an error naming the values it takes.
fn mobility_model(v: &Values) -> Result<LatticeModel, BuildError> {
    match v.text(SHEET_PARAMS, "mobility_model") {
        None => Ok(LatticeModel::PowerLaw),
        Some(name) => MOBILITY_MODELS
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, m)| *m)
            .ok_or_else(|| {
                BuildError::at(
                    "mobility_model",
                    format!("no `mobility_model` called `{name}`"),
                    "write `mobility_model = power_law` (the default) or `mobility_model = acoustic_phonon`",
                )
            }),
    }
}

/// Checks the mobility and anisotropy settings that contradict each other or that another
/// makes meaningless.
fn mobility_consistency(v: &Values) -> Result<(), BuildError> {
    let p = SHEET_PARAMS;
    for carrier in ["electron", "hole"] {
        let mass = format!("{carrier}_mass");
        for side in ["along", "across"] {
            let pair = format!("{carrier}_mass_{side}");
            v.exclusive(
                p,
                &mass,
                &pair,
                format!(
                    "give the masses along and across the channel (the density of states uses their geometric mean), or `{mass}` alone for an isotropic band"
                ),
            )?;
        }
    }
    if v.text(p, "transport_direction").is_some() && v.text(p, "channel").is_none() {
        return Err(BuildError::at(
            "transport_direction",
            "`transport_direction` is given without an anisotropic library `channel`",
            "add `channel = BP`, say, or give `electron_mass_along` and `electron_mass_across` (and the hole masses) instead",
        ));
    }
    for carrier in ["electron", "hole"] {
        let exponent = format!("{carrier}_mobility_density_exponent");
        let reference = format!("{carrier}_mobility_density_reference");
        if v.get(p, &exponent).is_some() && v.get(p, &reference).is_none() {
            return Err(BuildError::at(
                &exponent,
                format!(
                    "`{exponent}` has no effect without `{reference}`: the mobility then does not depend on the density"
                ),
                format!(
                    "add `{reference}` (the density at which the mobility is half its high-density value), or remove it"
                ),
            ));
        }
    }
    match mobility_model(v)? {
        LatticeModel::AcousticPhonon => {
            if let Some(s) = POWER_LAW_SETTINGS.iter().find(|s| v.get(p, s).is_some()) {
                return Err(BuildError::at(
                    s,
                    format!("`{s}` is not used by `mobility_model = acoustic_phonon`"),
                    "remove it (add an impurity-limited mobility with `electron_impurity_mobility` or `hole_impurity_mobility`), or leave `mobility_model` out",
                ));
            }
        }
        LatticeModel::PowerLaw => {
            if let Some(s) = PHONON_SETTINGS.iter().find(|s| v.get(p, s).is_some()) {
                return Err(BuildError::at(
                    s,
                    format!("`{s}` is used only by `mobility_model = acoustic_phonon`"),
                    "add `mobility_model = acoustic_phonon`, or remove it",
                ));
            }
            if v.get(p, "mobility_reference_temperature").is_none() {
                if let Some(s) = ["electron_mobility_exponent", "hole_mobility_exponent"]
                    .iter()
                    .find(|s| v.get(p, s).is_some())
                {
                    return Err(BuildError::at(
                        s,
                        format!(
                            "`{s}` has no effect without `mobility_reference_temperature`: the mobility is then taken at the device temperature"
                        ),
                        "add `mobility_reference_temperature` (the temperature the given mobility holds at), or remove it",
                    ));
                }
            }
        }
    }
    Ok(())
}

/// Sets the anisotropic masses of `carrier` (`electron` or `hole`): the density-of-states
/// mass is the geometric mean of the masses along and across the channel and the transport
/// mass is the one along it. `library` holds the library channel's pair, if anisotropic.
fn anisotropic_mass(
    v: &Values,
    carrier: &str,
    library: Option<(f64, f64)>,
    dos: &mut f64,
    transport: &mut Option<f64>,
) -> Result<(), BuildError> {
    let p = SHEET_PARAMS;
    let (along_name, across_name) = (
        format!("{carrier}_mass_along"),
        format!("{carrier}_mass_across"),
    );
    let mass = format!("{carrier}_mass");
    if library.is_some() && v.get(p, &mass).is_some() {
        return Err(BuildError::at(
            &mass,
            format!("`{mass}` is given for an anisotropic channel, whose density-of-states mass comes from its masses along and across the channel"),
            format!("give `{along_name}` and `{across_name}` instead"),
        ));
    }
    let along = v.get(p, &along_name).or(library.map(|l| l.0));
    let across = v.get(p, &across_name).or(library.map(|l| l.1));
    match (along, across) {
        (Some(a), Some(c)) => {
            *dos = (a * c).sqrt();
            *transport = Some(a);
            Ok(())
        }
        (None, None) => Ok(()),
        (Some(_), None) | (None, Some(_)) => {
            let (given, missing) = if along.is_some() {
                (&along_name, &across_name)
            } else {
                (&across_name, &along_name)
            };
            Err(BuildError::at(
                given,
                format!("`{given}` needs `{missing}`: an anisotropic band has a mass along and a mass across the channel"),
                format!("add `{missing}`, or give `{carrier}_mass` alone for an isotropic band"),
            ))
        }
    }
}

/// Settings that describe a Dirac-sheet (graphene-like) gate and mean nothing on a metal.
const DIRAC_GATE_SETTINGS: &[&str] = &[
    "gate_fermi_velocity",
    "gate_half_gap",
    "gate_gap_shift",
    "gate_degeneracy",
    "gate_residual_density",
];

/// Checks settings that contradict each other or that another makes meaningless, naming the
/// one to change.
fn sheet_consistency(v: &Values) -> Result<(), BuildError> {
    let p = SHEET_PARAMS;
    for (count, thick) in [
        ("insulator_layers", "insulator_thickness"),
        ("insulator2_layers", "insulator2_thickness"),
    ] {
        v.exclusive(
            p,
            count,
            thick,
            format!("give either the layer count or the thickness: remove `{thick}` or `{count}`"),
        )?;
        if let Some(n) = v.get(p, count) {
            if n.fract() != 0.0 || !(1.0..=1e6).contains(&n) {
                return Err(BuildError::at(
                    count,
                    format!("`{count}` must be a whole number of layers from 1, found {n}"),
                    format!(
                        "write a whole count such as `{count} = 10`, or give a thickness instead"
                    ),
                ));
            }
        }
    }
    if v.get(p, "saturation_velocity") == Some(0.0) {
        return Err(BuildError::at(
            "saturation_velocity",
            "`saturation_velocity = 0` would stop all current",
            "leave `saturation_velocity` out for a device without velocity saturation",
        ));
    }
    let gate_is_dirac = match v.text(p, "gate") {
        Some(g) => matches!(materials::gate(g), Ok(Gate::Dirac { .. })),
        None => v.get(p, "gate_fermi_velocity").is_some(),
    };
    if !gate_is_dirac {
        if let Some(s) = DIRAC_GATE_SETTINGS.iter().find(|s| v.get(p, s).is_some()) {
            let gate = v
                .text(p, "gate")
                .map_or("the default metal gate".to_string(), |g| {
                    format!("gate `{g}`")
                });
            return Err(BuildError::at(
                s,
                format!("`{s}` describes a Dirac-sheet gate, but {gate} is a metal"),
                "remove it, or use a Dirac gate (`gate = graphene`, or `gate_fermi_velocity` without `gate`)",
            ));
        }
    }
    for (offset, others, which) in [
        (
            "valley_offset",
            ["valley_mass", "valley_degeneracy"],
            "first extra",
        ),
        (
            "valley2_offset",
            ["valley2_mass", "valley2_degeneracy"],
            "second extra",
        ),
    ] {
        if v.get(p, offset).is_none() {
            if let Some(s) = others.iter().find(|s| v.get(p, s).is_some()) {
                return Err(BuildError::at(
                    s,
                    format!("`{s}` is given without `{offset}`, so there is no {which} valley"),
                    format!("add `{offset}` (its energy above the band edge) or remove it"),
                ));
            }
        }
    }
    Ok(())
}

/// What a slow-trap group's keys other than its density say.
const TRAP_SETTINGS: &[&str] = &[
    "level",
    "type",
    "time",
    "decades",
    "states",
    "depth",
    "decay_length",
];

/// The card's slow-trap groups (`trap1_` to `trap3_` keys), each from its density on; energies
/// arrive in joules and are stored in eV.
fn slow_traps(v: &Values) -> Result<Vec<TrapGroup>, BuildError> {
    let p = SHEET_PARAMS;
    let q = lamina_devices::physics::Q;
    let mut groups = Vec::new();
    for i in 0..MAX_TRAP_GROUPS {
        let key = |what: &str| trap_key(i, what);
        let density_key = key("density");
        let Some(density) = v.get(p, &density_key) else {
            let given = TRAP_SETTINGS
                .iter()
                .map(|w| key(w))
                .find(|k| v.get(p, k).is_some() || v.text(p, k).is_some());
            if let Some(k) = given {
                return Err(BuildError::at(
                    &k,
                    format!("`{k}` is given without `{density_key}`, so there is no slow-trap group {}", i + 1),
                    format!("add `{density_key}` (the group's density per area, e.g. `1e11 /cm^2`) or remove it"),
                ));
            }
            continue;
        };
        if groups.len() < i {
            return Err(BuildError::at(
                &density_key,
                format!(
                    "`{density_key}` is given, but there is no `{}`",
                    trap_key(i - 1, "density")
                ),
                "number the slow-trap groups from `trap1_` on",
            ));
        }
        let needed = |what: &str, help: &str| {
            let k = key(what);
            v.get(p, &k).ok_or_else(|| {
                BuildError::at(
                    &density_key,
                    format!("a slow-trap group needs `{k}`"),
                    format!("add `{k}` ({help})"),
                )
            })
        };
        let level = needed(
            "level",
            "its energy below the conduction band edge, e.g. `0.3 eV`",
        )? / q;
        let time = needed("time", "its relaxation time, e.g. `1 ms`")?;
        let kind = match v.text(p, &key("type")) {
            None | Some("acceptor") => TrapKind::Acceptor,
            Some("donor") => TrapKind::Donor,
            Some(other) => {
                return Err(BuildError::at(
                    &key("type"),
                    format!("no slow-trap type called `{other}`"),
                    format!("write `{} = acceptor` (neutral when empty, the default) or `donor` (positive when empty)", key("type")),
                ))
            }
        };
        let decades = v.get(p, &key("decades")).unwrap_or(0.0);
        let states = match v.get(p, &key("states")) {
            None => decades.ceil().max(1.0) as usize,
            Some(n) if n.fract() == 0.0 && (1.0..=16.0).contains(&n) => n as usize,
            Some(n) => {
                return Err(BuildError::at(
                    &key("states"),
                    format!(
                        "`{}` must be a whole number from 1 to 16, found {n}",
                        key("states")
                    ),
                    "write a whole count such as `4`: each state is one unknown of the device",
                ))
            }
        };
        groups.push(TrapGroup {
            density,
            level,
            kind,
            time,
            decades,
            states,
            depth: v.get(p, &key("depth")).unwrap_or(0.0),
            decay_length: v.get(p, &key("decay_length")).unwrap_or(0.0),
        });
    }
    Ok(groups)
}

/// Builds a 2D-channel FET card from library names and numbers (energies arrive in joules
/// and are stored in eV; trap densities arrive per joule and are stored per eV).
pub fn sheet_card(v: &Values) -> Result<SheetFetCard, BuildError> {
    sheet_consistency(v)?;
    mobility_consistency(v)?;
    let p = SHEET_PARAMS;
    let q = lamina_devices::physics::Q;
    let ev = |name: &str| v.get(p, name).map(|x| x / q);
    let mut card = SheetFetCard::default();
    let direction = v.text(p, "transport_direction");
    let channel_error = |m: String| BuildError {
        param: Some(
            if m.contains("`transport_direction`") {
                "transport_direction"
            } else {
                "channel"
            }
            .into(),
        ),
        message: m,
        help: None,
    };
    let mut library_masses = None;
    if let Some(ch) = v.text(p, "channel") {
        materials::apply_channel_along(&mut card, ch, direction).map_err(channel_error)?;
        if let Some(d) = direction {
            library_masses = Some(materials::anisotropic_masses(ch, d).map_err(channel_error)?);
        }
    }
    let set = |slot: &mut f64, x: Option<f64>| {
        if let Some(x) = x {
            *slot = x;
        }
    };
    set(&mut card.electron_mass, v.get(p, "electron_mass"));
    set(&mut card.hole_mass, v.get(p, "hole_mass"));
    anisotropic_mass(
        v,
        "electron",
        library_masses.map(|m| (m[0], m[1])),
        &mut card.electron_mass,
        &mut card.mobility.electron.transport_mass,
    )?;
    anisotropic_mass(
        v,
        "hole",
        library_masses.map(|m| (m[2], m[3])),
        &mut card.hole_mass,
        &mut card.mobility.hole.transport_mass,
    )?;
    card.mobility.model = mobility_model(v)?;
    let some = |slot: &mut Option<f64>, x: Option<f64>| {
        if x.is_some() {
            *slot = x;
        }
    };
    some(
        &mut card.mobility.reference_temperature,
        v.get(p, "mobility_reference_temperature"),
    );
    set(
        &mut card.mobility.electron.exponent,
        v.get(p, "electron_mobility_exponent"),
    );
    set(
        &mut card.mobility.hole.exponent,
        v.get(p, "hole_mobility_exponent"),
    );
    some(
        &mut card.mobility.electron.deformation_potential,
        ev("electron_deformation_potential"),
    );
    some(
        &mut card.mobility.hole.deformation_potential,
        ev("hole_deformation_potential"),
    );
    // J/m² arrives in SI, which is N/m.
    some(
        &mut card.mobility.elastic_modulus,
        v.get(p, "elastic_modulus"),
    );
    some(
        &mut card.mobility.electron.impurity_mobility,
        v.get(p, "electron_impurity_mobility"),
    );
    some(
        &mut card.mobility.hole.impurity_mobility,
        v.get(p, "hole_impurity_mobility"),
    );
    // The density dependence's exponent defaults to 1 (a Coulomb-limited mobility that
    // rises in proportion to the density).
    let density = |carrier: &str| {
        v.get(p, &format!("{carrier}_mobility_density_reference"))
            .map(|reference_density| DensityDependence {
                reference_density,
                exponent: v
                    .get(p, &format!("{carrier}_mobility_density_exponent"))
                    .unwrap_or(1.0),
            })
    };
    card.mobility.electron.density = density("electron");
    card.mobility.hole.density = density("hole");
    set(
        &mut card.electron_degeneracy,
        v.get(p, "electron_degeneracy"),
    );
    set(&mut card.hole_degeneracy, v.get(p, "hole_degeneracy"));
    set(&mut card.band_gap, ev("band_gap"));
    set(&mut card.electron_affinity, ev("electron_affinity"));
    set(&mut card.donor_density, v.get(p, "donor_density"));
    set(&mut card.acceptor_density, v.get(p, "acceptor_density"));
    set(
        &mut card.trap_density,
        v.get(p, "trap_density").map(|d| d * q),
    );
    set(&mut card.trap_neutral_level, ev("trap_neutral_level"));
    card.slow_traps = slow_traps(v)?;
    set(
        &mut card.fixed_charge_density,
        v.get(p, "fixed_charge_density"),
    );
    set(&mut card.temperature, v.get(p, "temperature"));
    // The library's gaps are 300 K values: where it cites a temperature fit, the gap follows
    // the device's temperature, the band edges moving apart evenly about midgap (the
    // construction the library's edges use), unless the card gives the gap itself.
    if let (Some(ch), None) = (v.text(p, "channel"), v.get(p, "band_gap")) {
        if let Some(gap) = materials::band_gap_at(ch, card.temperature) {
            if v.get(p, "electron_affinity").is_none() && card.temperature.is_finite() {
                card.electron_affinity += 0.5 * (card.band_gap - gap);
            }
            card.band_gap = gap;
        }
    }
    set(&mut card.width, v.get(p, "width"));
    set(&mut card.length, v.get(p, "length"));
    set(&mut card.electron_mobility, v.get(p, "electron_mobility"));
    set(&mut card.hole_mobility, v.get(p, "hole_mobility"));
    set(
        &mut card.saturation_velocity,
        v.get(p, "saturation_velocity"),
    );
    set(
        &mut card.saturation_exponent,
        v.get(p, "saturation_exponent"),
    );
    set(&mut card.source_resistance, v.get(p, "source_resistance"));
    set(&mut card.drain_resistance, v.get(p, "drain_resistance"));
    set(
        &mut card.overlap_capacitance,
        v.get(p, "overlap_capacitance"),
    );
    // Extra conduction valleys: a card's `valley_` keys replace the library's first extra
    // valley (or give one), its `valley2_` keys the second.
    for (i, offset) in ["valley_offset", "valley2_offset"].into_iter().enumerate() {
        let Some(offset) = ev(offset) else { continue };
        let mass_key = valley_key(i, "mass");
        let degeneracy_key = valley_key(i, "degeneracy");
        let valley = ExtraValley {
            offset,
            mass: v.get(p, &mass_key).ok_or_else(|| {
                BuildError::at(
                    &valley_key(i, "offset"),
                    format!("an extra valley needs `{mass_key}`"),
                    format!("add `{mass_key}` (its effective mass)"),
                )
            })?,
            degeneracy: v.get(p, &degeneracy_key).ok_or_else(|| {
                BuildError::at(
                    &valley_key(i, "offset"),
                    format!("an extra valley needs `{degeneracy_key}`"),
                    format!("add `{degeneracy_key}` (its spin-valley degeneracy)"),
                )
            })?,
        };
        match card.extra_valleys.len().cmp(&i) {
            std::cmp::Ordering::Greater => card.extra_valleys[i] = valley,
            std::cmp::Ordering::Equal => card.extra_valleys.push(valley),
            std::cmp::Ordering::Less => {
                return Err(BuildError::at(
                    "valley2_offset",
                    "`valley2_offset` is given, but there is no first extra valley".to_string(),
                    "add `valley_offset`, `valley_mass` and `valley_degeneracy`, or use a channel whose library entry has one",
                ))
            }
        }
    }
    // Gate: a library electrode, a Dirac sheet described in place, or a metal (by default at
    // the channel's electron affinity: flat bands at zero gate voltage).
    card.gate = match v.text(p, "gate") {
        Some(g) => materials::gate(g).map_err(|m| BuildError {
            param: Some("gate".into()),
            message: m,
            help: None,
        })?,
        None if v.get(p, "gate_fermi_velocity").is_some() => Gate::Dirac {
            fermi_velocity: 0.0,
            half_gap: 0.0,
            gap_shift: 0.0,
            degeneracy: 4.0,
            neutral_work_function: card.electron_affinity,
            residual_density: 0.0,
        },
        None => Gate::Metal {
            work_function: card.electron_affinity,
        },
    };
    match &mut card.gate {
        Gate::Metal { work_function } => set(work_function, ev("gate_work_function")),
        Gate::Dirac {
            fermi_velocity,
            half_gap,
            gap_shift,
            degeneracy,
            neutral_work_function,
            residual_density,
        } => {
            set(fermi_velocity, v.get(p, "gate_fermi_velocity"));
            set(half_gap, ev("gate_half_gap"));
            set(gap_shift, v.get(p, "gate_gap_shift"));
            set(degeneracy, v.get(p, "gate_degeneracy"));
            set(neutral_work_function, ev("gate_work_function"));
            set(residual_density, v.get(p, "gate_residual_density"));
        }
    }
    // Insulator layers: a library material with a layer count or thickness, or a
    // permittivity and thickness.
    let mut layers = Vec::new();
    // Each layer's tunnelling data, where it is a library insulator that has them.
    let mut barriers = Vec::new();
    for (mat, count, thick, eps) in [
        (
            "insulator",
            "insulator_layers",
            "insulator_thickness",
            "insulator_permittivity",
        ),
        (
            "insulator2",
            "insulator2_layers",
            "insulator2_thickness",
            "insulator2_permittivity",
        ),
    ] {
        let layer = match v.text(p, mat) {
            Some(name) => {
                let mut l = materials::insulator_layer(name, v.get(p, count), v.get(p, thick))
                    .map_err(|m| BuildError {
                        param: Some(mat.into()),
                        message: m,
                        help: None,
                    })?;
                set(&mut l.permittivity, v.get(p, eps));
                Some(l)
            }
            None => match (v.get(p, eps), v.get(p, thick)) {
                (Some(permittivity), Some(thickness)) => Some(Layer {
                    permittivity,
                    thickness,
                    breakdown_field: None,
                }),
                (None, None) if v.get(p, count).is_none() => None,
                _ => {
                    let at = [count, eps, thick]
                        .into_iter()
                        .find(|k| v.get(p, k).is_some())
                        .unwrap_or(mat);
                    return Err(BuildError::at(
                        at,
                        format!("`{at}` needs `{mat}` (a library material) or both `{eps}` and `{thick}`"),
                        format!("add `{mat} = hBN`, say, or give `{eps}` and `{thick}`"),
                    ));
                }
            },
        };
        if layer.is_some() {
            barriers.push(layer_barrier(v, mat)?);
        }
        layers.extend(layer);
    }
    if layers.is_empty() {
        return Err(BuildError {
            param: None,
            message: "the gate stack needs an insulator".into(),
            help: Some(
                "add `insulator = hBN, insulator_layers = 10`, or `insulator_permittivity` and `insulator_thickness`"
                    .into(),
            ),
        });
    }
    card.insulator = layers;
    contact_options(v, &mut card)?;
    // Gate leakage where every layer has tunnelling data (lamina_devices::sheet_fet::leakage).
    card.tunnelling = barriers
        .into_iter()
        .collect::<Option<Vec<_>>>()
        .unwrap_or_default();
    leakage_options(v, &mut card)?;
    card.validate()?;
    Ok(card)
}

/// When the gate leakage is in the solution: `gate_leakage = auto` (the default: only beyond
/// the gate drives where it reaches `gate_leakage_fraction` of the device's smallest channel
/// current there), `on` or `off`. A mode or fraction on a stack without tunnelling data is refused:
/// there is no leakage to switch.
fn leakage_options(v: &Values, card: &mut SheetFetCard) -> Result<(), BuildError> {
    use lamina_devices::sheet_fet::leakage::LeakageMode;
    let p = SHEET_PARAMS;
    let mode = v.text(p, "gate_leakage");
    let fraction = v.get(p, "gate_leakage_fraction");
    if card.tunnelling.is_empty() {
        let given = match (mode, fraction) {
            (Some(_), _) => Some("gate_leakage"),
            (None, Some(_)) => Some("gate_leakage_fraction"),
            (None, None) => None,
        };
        if let Some(key) = given {
            return Err(BuildError::at(
                key,
                format!(
                    "`{key}` is given, but the gate stack has no gate leakage: a layer lacks \
                     tunnelling data"
                ),
                "use library insulators that have tunnelling data (hBN, SiO2, HfO2, Al2O3), \
                 or give each layer's affinity, band gap and tunnelling masses",
            ));
        }
        return Ok(());
    }
    card.gate_leakage = match mode {
        None | Some("auto") => LeakageMode::Auto,
        Some("on") => LeakageMode::On,
        Some("off") => LeakageMode::Off,
        Some(other) => {
            return Err(BuildError::at(
                "gate_leakage",
                format!("no gate-leakage mode called `{other}`"),
                "write `gate_leakage = auto` (the default: left out where below \
                 `gate_leakage_fraction` of the device's smallest channel current), `on` or \
                 `off`",
            ))
        }
    };
    if let Some(f) = fraction {
        if card.gate_leakage != LeakageMode::Auto {
            return Err(BuildError::at(
                "gate_leakage_fraction",
                "`gate_leakage_fraction` only applies with `gate_leakage = auto`".to_string(),
                "remove `gate_leakage_fraction`, or set `gate_leakage = auto`",
            ));
        }
        if !(f > 0.0 && f <= 1.0) {
            return Err(BuildError::at(
                "gate_leakage_fraction",
                format!("`gate_leakage_fraction` {f} is outside (0, 1]"),
                "give a fraction such as 1e-3 (the default)",
            ));
        }
        card.leakage_fraction = f;
    }
    Ok(())
}

/// Schottky contacts and the natural length: the barriers from a metal (library name or
/// work function) with a pinning factor, or given directly; the natural length from the
/// channel's thickness and permittivity and the card's insulator, or given directly. Every
/// combination that would leave a value undetermined or let one key silently win is refused.
fn contact_options(v: &Values, card: &mut SheetFetCard) -> Result<(), BuildError> {
    let p = SHEET_PARAMS;
    let q = lamina_devices::physics::Q;
    let ev = |name: &str| v.get(p, name).map(|x| x / q);
    // The natural length.
    v.exclusive(
        p,
        "natural_length",
        "channel_thickness",
        "give the natural length, or the channel's thickness and permittivity to compute it",
    )?;
    v.exclusive(
        p,
        "natural_length",
        "channel_permittivity",
        "give the natural length, or the channel's thickness and permittivity to compute it",
    )?;
    match (
        v.get(p, "channel_thickness"),
        v.get(p, "channel_permittivity"),
    ) {
        (Some(t), Some(eps)) => {
            if !(t > 0.0 && eps >= 1.0) {
                return Err(BuildError::at(
                    "channel_thickness",
                    "the channel's thickness must be positive and its permittivity at least 1",
                    "give the monolayer's thickness (e.g. `channel_thickness = 0.65 nm`) and its relative permittivity",
                ));
            }
            card.natural_length = lamina_devices::short_channel::natural_length(
                eps,
                t,
                card.insulator.iter().map(|l| (l.thickness, l.permittivity)),
            );
        }
        (Some(_), None) | (None, Some(_)) => {
            let (given, missing) = if v.has(p, "channel_thickness") {
                ("channel_thickness", "channel_permittivity")
            } else {
                ("channel_permittivity", "channel_thickness")
            };
            return Err(BuildError::at(
                given,
                format!(
                    "`{given}` is given without `{missing}`, so the natural length is undetermined"
                ),
                format!("add `{missing}`, or give `natural_length` itself"),
            ));
        }
        (None, None) => {
            if let Some(l) = v.get(p, "natural_length") {
                card.natural_length = l;
            }
        }
    }
    // The barriers.
    let metal_keys = ["contact_metal", "contact_work_function"];
    let direct_keys = ["contact_electron_barrier", "contact_hole_barrier"];
    let metal_given = metal_keys.iter().find(|k| v.has(p, k));
    let direct_given = direct_keys.iter().find(|k| v.has(p, k));
    v.exclusive(
        p,
        "contact_metal",
        "contact_work_function",
        "name the metal (its library work function) or give the work function",
    )?;
    if let (Some(m), Some(d)) = (metal_given, direct_given) {
        return Err(BuildError::at(
            d,
            format!("`{m}` and `{d}` both set the contact barrier; one would silently win"),
            "give the contact metal (with `contact_pinning`), or the barriers directly",
        ));
    }
    let gap = card.band_gap;
    let barriers = if metal_given.is_some() {
        let work_function = match v.text(p, "contact_metal") {
            Some(name) => match materials::gate(name).map_err(|m| BuildError {
                param: Some("contact_metal".into()),
                message: m,
                help: None,
            })? {
                Gate::Metal { work_function } => work_function,
                Gate::Dirac { .. } => {
                    return Err(BuildError::at(
                        "contact_metal",
                        format!("`{name}` is a 2D semimetal, not a metal with a fixed work function"),
                        "name a metal of the library (`lamina materials` lists them), or give `contact_work_function`",
                    ))
                }
            },
            None => ev("contact_work_function").unwrap_or(0.0),
        };
        let pinning = v.get(p, "contact_pinning").unwrap_or(1.0);
        if !(0.0..=1.0).contains(&pinning) {
            return Err(BuildError::at(
                "contact_pinning",
                format!("`contact_pinning` must lie in [0, 1], found {pinning}"),
                "1 is the Schottky-Mott rule (no pinning), 0 pins the metal's level at the neutrality level",
            ));
        }
        let neutral = match ev("contact_neutral_level") {
            Some(_) if pinning == 1.0 => {
                return Err(BuildError::at(
                    "contact_neutral_level",
                    "`contact_neutral_level` has no effect with `contact_pinning` 1 (the Schottky-Mott rule, the default)",
                    "give `contact_pinning` below 1 for the interface to pin toward it, or remove it",
                ))
            }
            Some(n) => n,
            None if pinning == 1.0 => 0.0,
            None => {
                return Err(BuildError::at(
                    "contact_pinning",
                    "a pinning factor below 1 needs the neutrality level the interface pins to",
                    "add `contact_neutral_level` (an energy below the vacuum level, like a work function)",
                ))
            }
        };
        let b = lamina_devices::contact::barriers(
            work_function,
            pinning,
            neutral,
            card.electron_affinity,
            gap,
        );
        Some((b.electron, b.hole))
    } else if direct_given.is_some() {
        match (ev("contact_electron_barrier"), ev("contact_hole_barrier")) {
            (Some(n), Some(h)) => Some((n, h)),
            (Some(n), None) => Some((n, gap - n)),
            (None, Some(h)) => Some((gap - h, h)),
            (None, None) => None,
        }
    } else {
        for k in [
            "contact_pinning",
            "contact_neutral_level",
            "contact_screening_length",
        ] {
            if v.has(p, k) {
                return Err(BuildError::at(
                    k,
                    format!("`{k}` is given, but the card has no Schottky contacts"),
                    "add `contact_metal` (or `contact_work_function`, or `contact_electron_barrier`), or remove it",
                ));
            }
        }
        None
    };
    if direct_given.is_some() {
        for k in ["contact_pinning", "contact_neutral_level"] {
            if v.has(p, k) {
                return Err(BuildError::at(
                    k,
                    format!("`{k}` has no effect on barriers given directly"),
                    "remove it, or give the contact metal instead of the barriers",
                ));
            }
        }
    }
    card.contacts = barriers.map(|(electron_barrier, hole_barrier)| ContactCard {
        electron_barrier,
        hole_barrier,
        screening_length: v.get(p, "contact_screening_length").unwrap_or(0.0),
    });
    Ok(())
}

/// The card keys of a layer's tunnelling data (`mat` is `insulator` or `insulator2`).
const TUNNELLING_KEYS: [&str; 4] = [
    "electron_affinity",
    "band_gap",
    "electron_tunnelling_mass",
    "hole_tunnelling_mass",
];

/// The tunnelling data of the layer `mat`: the library insulator's, with any of the four keys
/// replacing its value; for a layer without a library material, all four keys or none (then
/// the layer, and so the stack, has no gate leakage).
fn layer_barrier(v: &Values, mat: &str) -> Result<Option<Barrier>, BuildError> {
    let p = SHEET_PARAMS;
    let key = |what: &str| format!("{mat}_{what}");
    let [chi, gap, me, mh] = TUNNELLING_KEYS.map(|what| {
        v.get(p, &key(what)).map(|x| {
            if what.ends_with("mass") {
                x
            } else {
                x / lamina_devices::physics::Q
            }
        })
    });
    let library = v
        .text(p, mat)
        .and_then(|n| materials::insulator_barrier(n).ok());
    match (library, chi, gap, me, mh) {
        (Some(b), ..) => Ok(Some(Barrier {
            electron_affinity: chi.unwrap_or(b.electron_affinity),
            band_gap: gap.unwrap_or(b.band_gap),
            electron_mass: me.unwrap_or(b.electron_mass),
            hole_mass: mh.unwrap_or(b.hole_mass),
        })),
        (None, Some(electron_affinity), Some(band_gap), Some(electron_mass), Some(hole_mass)) => {
            Ok(Some(Barrier {
                electron_affinity,
                band_gap,
                electron_mass,
                hole_mass,
            }))
        }
        (None, None, None, None, None) => Ok(None),
        _ => {
            let given = TUNNELLING_KEYS
                .iter()
                .map(|w| key(w))
                .find(|k| v.get(p, k).is_some())
                .unwrap_or_else(|| mat.to_string());
            Err(BuildError::at(
                &given,
                format!("`{given}` needs the layer's other tunnelling keys, or `{mat}` set to a library insulator"),
                format!(
                    "give all of `{}`, or remove `{given}`",
                    TUNNELLING_KEYS.map(key).join("`, `")
                ),
            ))
        }
    }
}

fn square(p: Polarity, v: &Values) -> SquareLawFet {
    SquareLawFet::new(p, v.numbers[0], v.numbers[1])
        .with_length_modulation(v.numbers[2])
        .with_gate_capacitance(v.numbers[3])
}

/// The kind called `name`.
pub fn kind(name: &str) -> Option<&'static Kind> {
    KINDS.iter().find(|k| k.name == name)
}

/// Who set a parameter of a 2D-FET element.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Setter {
    /// Nobody: the library or the model's default supplies it.
    Unset,
    /// The device card.
    Card,
    /// The instance (or, for a `sheet_fet` placed without a device card, its own values).
    Instance,
    /// The command line (`--set card.key=value`), in place of the card's own value.
    CommandLine,
}

/// Which parameters of one 2D-FET element its device card and its instance set, and the
/// names they gave: enough to say where each value of the element's resolved card came from
/// ([`resolved_values`]). Kept beside the resolved card by the elaborator, shared like it
/// between the instances of a card that change nothing.
#[derive(Clone, Debug, PartialEq)]
pub struct CardOrigins {
    device: String,
    setters: Vec<Setter>,
    texts: Vec<Option<String>>,
}

impl CardOrigins {
    /// The origins of `v`, the values a `sheet_fet` element of device card (or kind) `device`
    /// was built from; `by_instance` says whether the instance set a parameter and
    /// `by_command_line` whether `--set card.key` set it on the card.
    pub fn new(
        device: &str,
        v: &Values,
        by_instance: impl Fn(&str) -> bool,
        by_command_line: impl Fn(&str) -> bool,
    ) -> Self {
        let setters = SHEET_PARAMS
            .iter()
            .enumerate()
            .map(|(i, spec)| {
                let given = v.given.get(i).copied().unwrap_or(false)
                    || v.texts.get(i).is_some_and(Option::is_some);
                match (given, by_instance(spec.name)) {
                    (false, _) => Setter::Unset,
                    (true, true) => Setter::Instance,
                    (true, false) if by_command_line(spec.name) => Setter::CommandLine,
                    (true, false) => Setter::Card,
                }
            })
            .collect();
        CardOrigins {
            device: device.to_string(),
            setters,
            texts: v.texts.clone(),
        }
    }

    /// The device card the element was placed from (`sheet_fet` for one placed directly).
    pub fn device(&self) -> &str {
        &self.device
    }

    /// Who set the parameter `name` (`Unset` for a name that is no parameter).
    pub fn setter(&self, name: &str) -> Setter {
        SHEET_PARAMS
            .iter()
            .position(|p| p.name == name)
            .and_then(|i| self.setters.get(i).copied())
            .unwrap_or(Setter::Unset)
    }

    /// The name given for the name-valued parameter `name` (`channel`, `gate`, ...).
    pub fn text(&self, name: &str) -> Option<&str> {
        SHEET_PARAMS
            .iter()
            .position(|p| p.name == name)
            .and_then(|i| self.texts.get(i))
            .and_then(|t| t.as_deref())
    }

    /// The name-valued parameters that were given, with their names and who set them.
    pub fn names(&self) -> Vec<(&'static str, &str, Setter)> {
        SHEET_PARAMS
            .iter()
            .zip(&self.texts)
            .zip(&self.setters)
            .filter_map(|((p, t), s)| t.as_deref().map(|t| (p.name, t, *s)))
            .collect()
    }
}

/// Where one value of a resolved 2D-FET card came from.
#[derive(Clone, Debug, PartialEq)]
pub enum Origin {
    /// The instance set it.
    Instance,
    /// The device card set it.
    Card,
    /// `--set card.key=value` on the command line set it.
    CommandLine,
    /// The material library's entry `entry` in `section`, under `key`; `note` says how the
    /// library value was adjusted, if it was.
    Library {
        /// `channels`, `insulators` or `gates`.
        section: &'static str,
        /// The entry (`MoS2`, ...).
        entry: String,
        /// The library key (`band_gap`, `electron_mass_armchair`, ...).
        key: String,
        /// How the value was adjusted (a temperature fit, say), if it was.
        note: Option<String>,
    },
    /// Computed from other values, as said.
    Derived(String),
    /// The model's default.
    Default,
}

/// One value of a resolved 2D-FET card: the card key that sets it, its value in `unit` (the
/// card's own units: eV for energies, free-electron masses `m0`, `1` for pure numbers, SI
/// otherwise) and where it came from.
#[derive(Clone, Debug, PartialEq)]
pub struct CardValue {
    /// The card key (`insulator_breakdown_field` and `insulator2_breakdown_field`, which the
    /// library supplies and no card sets, are named after their layer).
    pub key: String,
    /// The value.
    pub value: f64,
    /// Its unit.
    pub unit: &'static str,
    /// Where it came from.
    pub origin: Origin,
}

/// Every value of the resolved card `card` with where it came from, grouped as a reader
/// wants them: channel, doping and traps, gate, insulator layers, geometry and transport,
/// mobility inputs. Optional values are listed only where the card has them, and mobility
/// inputs only where the card's mobility model uses them (a library channel's phonon inputs
/// mean nothing to the power law, say); the mobility each carrier then uses is the device's
/// [`SheetFet::mobility_report`].
pub fn resolved_values(card: &SheetFetCard, o: &CardOrigins) -> Vec<CardValue> {
    let mut rows = Vec::new();
    let by = |key: &str| match o.setter(key) {
        Setter::Card => Some(Origin::Card),
        Setter::Instance => Some(Origin::Instance),
        Setter::CommandLine => Some(Origin::CommandLine),
        Setter::Unset => None,
    };
    let channel = o.text("channel");
    let direction = o.text("transport_direction");
    // A library key of `entry`, per transport direction where the entry has one.
    let library = |section: &'static str, entry: Option<&str>, key: &str| {
        let entry = entry?;
        [
            direction.map(|d| format!("{key}_{d}")),
            Some(key.to_string()),
        ]
        .into_iter()
        .flatten()
        .find(|k| materials::source(section, entry, k).is_some())
        .map(|key| Origin::Library {
            section,
            entry: entry.to_string(),
            key,
            note: None,
        })
    };
    let mut push = |key: &str, value: f64, unit: &'static str, origin: Origin| {
        rows.push(CardValue {
            key: key.to_string(),
            value,
            unit,
            origin,
        })
    };
    let plain = |key: &str, section: &'static str, entry: Option<&str>| {
        by(key)
            .or_else(|| library(section, entry, key))
            .unwrap_or(Origin::Default)
    };
    // Channel band structure.
    for (carrier, mass, transport) in [
        (
            "electron",
            card.electron_mass,
            card.mobility.electron.transport_mass,
        ),
        ("hole", card.hole_mass, card.mobility.hole.transport_mass),
    ] {
        let key = format!("{carrier}_mass");
        let (along, across) = (format!("{key}_along"), format!("{key}_across"));
        let origin = if let Some(o) = by(&key) {
            o
        } else if by(&along).is_some() || by(&across).is_some() {
            Origin::Derived(format!(
                "geometric mean of `{along}` and `{across}` (density-of-states mass)"
            ))
        } else if let (Some(ch), Some(d), Some(_)) = (channel, direction, transport) {
            Origin::Derived(format!(
                "geometric mean of the library's {ch} masses along and across `{d}` (density-of-states mass)"
            ))
        } else {
            plain(&key, "channels", channel)
        };
        push(&key, mass, "m0", origin);
        if let Some(t) = transport {
            let origin = by(&along)
                .or_else(|| library("channels", channel, &key))
                .unwrap_or(Origin::Default);
            push(&along, t, "m0", origin);
        }
    }
    for key in ["electron_degeneracy", "hole_degeneracy"] {
        let value = if key.starts_with('e') {
            card.electron_degeneracy
        } else {
            card.hole_degeneracy
        };
        push(key, value, "1", plain(key, "channels", channel));
    }
    // The library's gap follows the temperature where it cites a fit (see `sheet_card`).
    let fitted = by("band_gap").is_none()
        && channel.is_some_and(|ch| materials::band_gap_at(ch, card.temperature).is_some());
    let adjusted = |origin: Origin, how: &str| match origin {
        Origin::Library {
            section,
            entry,
            key,
            ..
        } if fitted && card.temperature != materials::LIBRARY_TEMPERATURE_K => Origin::Library {
            section,
            entry,
            key,
            note: Some(how.to_string()),
        },
        other => other,
    };
    let gap = adjusted(
        plain("band_gap", "channels", channel),
        "moved from its 300 K value to the device temperature by the library's Varshni fit",
    );
    push("band_gap", card.band_gap, "eV", gap);
    let affinity = adjusted(
        plain("electron_affinity", "channels", channel),
        "moved by half the gap's change with temperature (band edges apart evenly about midgap)",
    );
    push("electron_affinity", card.electron_affinity, "eV", affinity);
    for (i, valley) in card.extra_valleys.iter().enumerate() {
        for (what, value, unit) in [
            ("offset", valley.offset, "eV"),
            ("mass", valley.mass, "m0"),
            ("degeneracy", valley.degeneracy, "1"),
        ] {
            let key = valley_key(i, what);
            let offset = valley_key(i, "offset");
            // A card's valley keys replace the library's valley as a whole.
            let origin = by(&key)
                .or_else(|| by(&offset).map(|_| Origin::Default))
                .or_else(|| library("channels", channel, &key))
                .unwrap_or(Origin::Default);
            push(&key, value, unit, origin);
        }
    }
    // Doping, traps, fixed charge.
    for (key, value, unit) in [
        ("donor_density", card.donor_density, "1/m²"),
        ("acceptor_density", card.acceptor_density, "1/m²"),
        ("trap_density", card.trap_density, "1/(eV m²)"),
        ("trap_neutral_level", card.trap_neutral_level, "eV"),
        ("fixed_charge_density", card.fixed_charge_density, "1/m²"),
    ] {
        push(key, value, unit, by(key).unwrap_or(Origin::Default));
    }
    for (i, g) in card.slow_traps.iter().enumerate() {
        for (what, value, unit) in [
            ("density", g.density, "1/m²"),
            ("level", g.level, "eV"),
            ("time", g.time, "s"),
            ("decades", g.decades, "1"),
            ("states", g.states as f64, "1"),
            ("depth", g.depth, "m"),
            ("decay_length", g.decay_length, "m"),
        ] {
            let key = trap_key(i, what);
            let origin = by(&key).unwrap_or(Origin::Default);
            push(&key, value, unit, origin);
        }
    }
    // Gate.
    let gate = o.text("gate");
    let affinity_default = || {
        Origin::Derived("the channel's electron affinity (flat bands at zero gate voltage)".into())
    };
    match &card.gate {
        Gate::Metal { work_function } => {
            let origin = by("gate_work_function")
                .or_else(|| library("gates", gate, "work_function"))
                .unwrap_or_else(affinity_default);
            push("gate_work_function", *work_function, "eV", origin);
        }
        Gate::Dirac {
            fermi_velocity,
            half_gap,
            gap_shift,
            degeneracy,
            neutral_work_function,
            residual_density,
        } => {
            let origin = by("gate_work_function")
                .or_else(|| library("gates", gate, "neutral_work_function"))
                .unwrap_or_else(affinity_default);
            push("gate_work_function", *neutral_work_function, "eV", origin);
            for (key, lib_key, value, unit) in [
                (
                    "gate_fermi_velocity",
                    "fermi_velocity",
                    *fermi_velocity,
                    "m/s",
                ),
                ("gate_half_gap", "half_gap", *half_gap, "eV"),
                ("gate_gap_shift", "gap_shift", *gap_shift, "1"),
                ("gate_degeneracy", "degeneracy", *degeneracy, "1"),
                (
                    "gate_residual_density",
                    "residual_density",
                    *residual_density,
                    "1/m²",
                ),
            ] {
                let origin = by(key)
                    .or_else(|| library("gates", gate, lib_key))
                    .unwrap_or(Origin::Default);
                push(key, value, unit, origin);
            }
        }
    }
    // Insulator layers, in the order the card's settings make them.
    let present = ["insulator", "insulator2"].into_iter().filter(|m| {
        o.text(m).is_some()
            || o.setter(&format!("{m}_permittivity")) != Setter::Unset
            || o.setter(&format!("{m}_thickness")) != Setter::Unset
    });
    for (k, (mat, layer)) in present.zip(&card.insulator).enumerate() {
        let name = o.text(mat);
        let (eps, thick, count) = (
            format!("{mat}_permittivity"),
            format!("{mat}_thickness"),
            format!("{mat}_layers"),
        );
        let origin = by(&eps)
            .or_else(|| library("insulators", name, "permittivity"))
            .unwrap_or(Origin::Default);
        push(&eps, layer.permittivity, "1", origin);
        let origin = match (by(&thick), by(&count), name) {
            (Some(o), _, _) => o,
            (None, Some(_), Some(n)) => {
                let per_layer = materials::insulator_layer(n, Some(1.0), None)
                    .map_or(f64::NAN, |l| l.thickness);
                Origin::Derived(format!(
                    "`{count}` = {} times the library's {n} layer_thickness",
                    (layer.thickness / per_layer).round()
                ))
            }
            _ => Origin::Default,
        };
        push(&thick, layer.thickness, "m", origin);
        if let Some(field) = layer.breakdown_field {
            let key = format!("{mat}_breakdown_field");
            let origin = library("insulators", name, "breakdown_field").unwrap_or(Origin::Default);
            push(&key, field, "V/m", origin);
        }
        if let Some(b) = card.tunnelling.get(k) {
            let values = [
                b.electron_affinity,
                b.band_gap,
                b.electron_mass,
                b.hole_mass,
            ];
            let library_keys = [
                "electron_affinity",
                "band_gap",
                "tunnelling_electron_mass",
                "tunnelling_hole_mass",
            ];
            for ((what, lib), value) in TUNNELLING_KEYS.iter().zip(library_keys).zip(values) {
                let key = format!("{mat}_{what}");
                let origin = by(&key)
                    .or_else(|| library("insulators", name, lib))
                    .unwrap_or(Origin::Default);
                let unit = if what.ends_with("mass") { "m0" } else { "eV" };
                push(&key, value, unit, origin);
            }
        }
    }
    // The fraction below which an `auto` card leaves its gate leakage out.
    if !card.tunnelling.is_empty()
        && card.gate_leakage == lamina_devices::sheet_fet::leakage::LeakageMode::Auto
    {
        let key = "gate_leakage_fraction";
        push(
            key,
            card.leakage_fraction,
            "1",
            by(key).unwrap_or(Origin::Default),
        );
    }
    // Geometry, temperature, transport and contacts.
    for (key, value, unit) in [
        ("temperature", card.temperature, "K"),
        ("width", card.width, "m"),
        ("length", card.length, "m"),
        ("saturation_velocity", card.saturation_velocity, "m/s"),
        ("saturation_exponent", card.saturation_exponent, "1"),
        ("source_resistance", card.source_resistance, "Ω m"),
        ("drain_resistance", card.drain_resistance, "Ω m"),
        ("overlap_capacitance", card.overlap_capacitance, "F/m"),
    ] {
        push(key, value, unit, by(key).unwrap_or(Origin::Default));
    }
    // Mobility inputs, only those the card's mobility model uses: the power law's mobilities
    // (and its exponents with a reference temperature), the phonon model's inputs.
    let m = &card.mobility;
    let power_law = m.model == LatticeModel::PowerLaw;
    if power_law {
        for (key, value) in [
            ("electron_mobility", card.electron_mobility),
            ("hole_mobility", card.hole_mobility),
        ] {
            push(key, value, "m²/(V s)", by(key).unwrap_or(Origin::Default));
        }
    }
    if let (Some(t), true) = (m.reference_temperature, power_law) {
        let key = "mobility_reference_temperature";
        push(key, t, "K", by(key).unwrap_or(Origin::Default));
    }
    for (carrier, c) in [("electron", &m.electron), ("hole", &m.hole)] {
        if power_law && m.reference_temperature.is_some() {
            let key = format!("{carrier}_mobility_exponent");
            push(&key, c.exponent, "1", plain(&key, "channels", channel));
        }
        let optional = [
            (
                "deformation_potential",
                c.deformation_potential.filter(|_| !power_law),
                "eV",
            ),
            ("impurity_mobility", c.impurity_mobility, "m²/(V s)"),
            (
                "mobility_density_reference",
                c.density.map(|d| d.reference_density),
                "1/m²",
            ),
            (
                "mobility_density_exponent",
                c.density.map(|d| d.exponent),
                "1",
            ),
        ];
        for (what, value, unit) in optional {
            if let Some(value) = value {
                let key = format!("{carrier}_{what}");
                push(&key, value, unit, plain(&key, "channels", channel));
            }
        }
    }
    if let (Some(c), false) = (m.elastic_modulus, power_law) {
        push(
            "elastic_modulus",
            c,
            "J/m²",
            plain("elastic_modulus", "channels", channel),
        );
    }
    rows
}
