//! The ring's frequency drift after a bias stress, and its recovery.
//!
//! Slow traps (a 2D-channel FET's `trap1_*` keys) fill and empty over microseconds to hours, so
//! a ring held at a raised supply shifts its devices' thresholds, and its frequency drifts. The
//! job runs four kinds of state through one engine, one physics:
//!
//! 1. **Fresh.** The ring unpowered long enough for every trap to be at rest: the operating
//!    point with the supply and every stage output at 0 V (any other source of the circuit
//!    keeps its value throughout).
//! 2. **Stress.** The ring *stalled*, as a ring with its enable off sits: the stage outputs held
//!    alternately at the stress supply and at 0 V (even stages high, the single-defect pattern
//!    of [`crate::ring`]) and the supply at the stress value, for the stress time. The holding
//!    is done by ideal voltage sources pinning every stage output in a copy of the ring's
//!    circuit (the *held* circuit); its transient moves only the trap occupancies once the
//!    [`RAMP`] to the held levels is over, so its steps grow as long as the traps allow. An
//!    odd ring has one defect in that pattern: stage 0's input and output are both held high,
//!    so its n-channel device conducts through the hold (drain high as well as gate), a
//!    stress that differs from its neighbours' at the drain end. A ring stalled by a real
//!    enable gate sits in a consistent state instead; with 21 stages the defect is one stage
//!    in 21 (a model estimate either way).
//! 3. **Recovery.** The held ring with the supply and every stage output at 0 V, for each
//!    recovery time (counted from the end of the stress, the holds chained in increasing
//!    order).
//! 4. **Measurement**, after each of the above: the held levels set to the single-defect
//!    pattern at the nominal supply for [`SETTLE`] (ramp included), then the ring itself
//!    released from that state, every unknown carried over (trap occupancies included,
//!    [`lamina_engine::Start::State`]), and its frequency measured as `lamina ring` does.
//!
//! The held circuit is the ring's circuit with one source per stage added after every other
//! element, so its unknowns are the ring's, in the same order, followed by the sources' branch
//! currents; this is checked name by name before anything runs.
//!
//! # Frozen traps
//! The measurement lasts nanoseconds. Slow traps with time constants far longer stay as the
//! stress left them, so the frequency measured is the one the stressed devices give. This is
//! checked: the set-up hold and the measured run together must be shorter than
//! [`FROZEN_FRACTION`] of the shortest trap time constant in the ring (then no occupancy moves
//! more than about that fraction of its way to rest), else the job refuses with the figures.
//!
//! # Fresh is unpowered
//! The fresh ring's traps are at rest at 0 V, and recovery relaxes them back there, so a long
//! recovery returns to the fresh frequency. A plain `lamina ring` run instead starts from an
//! operating point at the nominal supply, traps at rest there, and can differ from the fresh
//! frequency here by the traps' shift between 0 V and the supply.
//!
//! # Whole periods only
//! The stalled pattern stresses alternate devices: the n-channel device of a stage whose input
//! was held high, the p-channel device of one whose input was held low. A whole period has
//! every stage switch both ways, so it sees both; one pass of the edge-travel estimate
//! (`RingParams::edge`) from the single-defect start sees one transition per stage, each made
//! by the device the stress held off, and would report a drift of the wrong size and even
//! sign (+6 % against -1.7 % by whole periods for the demo ring after 1 s at 1.2 V). The job
//! refuses it.
//!
//! # Without slow traps
//! A ring whose devices have no slow traps has nothing that remembers the stress: every
//! measurement gives the fresh frequency. The job still runs (a check of the procedure) and
//! the command says so in a warning.
//!
//! The first-order kinetics of each trap state (`df/dt = (f_FD - f)/τ`, capture and emission
//! tied by detailed balance, W. Shockley and W. T. Read, Phys. Rev. 87, 835 (1952)) are in the
//! devices crate's `sheet_fet::traps` module; a single trap level held at a fixed bias fills as
//! `1 - exp(-T/τ)`, and for small shifts the frequency drift follows it.

use crate::builtin::Ring;
use crate::ring::{run_ring_from, RingError, RingParams, RingReport};
use lamina_engine::elements::{VoltageSource, Waveform};
use lamina_engine::{
    Circuit, ElementId, Integrator, OpParams, Output, Start, System, TransientParams,
};
use lamina_netlist::Design;
use std::fmt;

/// Length of the ramp from one set of held levels to the next (s).
pub const RAMP: f64 = 100e-12;
/// Set-up hold before each measurement, ramp included (s): the held levels go to the
/// single-defect pattern at the nominal supply and every device settles there.
pub const SETTLE: f64 = 1e-9;
/// Shortest stress or recovery time (s), ten ramps: shorter holds would mostly be ramp.
pub const MIN_HOLD: f64 = 1e-9;
/// The set-up hold plus the measured run must be shorter than this fraction of the shortest
/// trap time constant (see the module doc).
pub const FROZEN_FRACTION: f64 = 1e-2;

/// What to stress and when to measure.
#[derive(Clone, Debug, PartialEq)]
pub struct StressPlan {
    /// Supply during the stress (V); the stage outputs are held alternately at it and at 0 V.
    pub supply_v: f64,
    /// How long the stress is held (s).
    pub time_s: f64,
    /// Recovery times after the end of the stress at which the ring is measured again (s).
    pub recovery_s: Vec<f64>,
}

impl StressPlan {
    /// Checks the plan's values: a positive, finite supply; stress and recovery times finite
    /// and at least [`MIN_HOLD`].
    pub fn check(&self) -> Result<(), String> {
        if !(self.supply_v.is_finite() && self.supply_v > 0.0) {
            return Err(format!(
                "the stress supply must be a positive voltage, not {} V",
                self.supply_v
            ));
        }
        let time = |what: &str, t: f64| {
            if !t.is_finite() || t <= 0.0 {
                Err(format!(
                    "the {what} time must be positive, not {t} s; give a time such as 1 s"
                ))
            } else if t < MIN_HOLD {
                Err(format!(
                    "the {what} time {t:e} s is shorter than {MIN_HOLD:e} s; the ramp of \
                     {RAMP:e} s to the held levels would be most of it"
                ))
            } else {
                Ok(())
            }
        };
        time("stress", self.time_s)?;
        self.recovery_s
            .iter()
            .try_for_each(|&t| time("recovery", t))
    }
}

/// A measurement after a recovery.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Recovered {
    /// Recovery time since the end of the stress (s).
    pub recovery_s: f64,
    /// The ring measured then.
    pub ring: RingReport,
}

/// What the stress job measured.
#[derive(Clone, Debug, PartialEq)]
pub struct StressReport {
    /// The nominal supply (V).
    pub supply_v: f64,
    /// The plan that ran (recovery times sorted, repeats dropped).
    pub plan: StressPlan,
    /// Shortest trap time constant of the ring's devices (s), if any has slow traps.
    pub shortest_trap_time_s: Option<f64>,
    /// The ring fresh (traps at rest at 0 V).
    pub fresh: RingReport,
    /// The ring right after the stress.
    pub stressed: RingReport,
    /// The ring after each recovery time, in increasing order.
    pub recovered: Vec<Recovered>,
    /// Accepted time steps of every hold (stress, recoveries and set-up holds).
    pub hold_steps: usize,
}

impl StressReport {
    /// Relative frequency change against the fresh ring, `f / f_fresh - 1`.
    pub fn drift(&self, r: &RingReport) -> f64 {
        r.frequency / self.fresh.frequency - 1.0
    }
}

/// Why the stress job produced no result.
#[derive(Debug)]
pub enum StressError {
    /// The plan or the circuits do not fit (bad times, a held copy that is not the ring).
    Invalid(String),
    /// A hold or a measurement failed.
    Ring(RingError),
    /// The measurement is not short against the shortest trap time constant.
    NotFrozen(String),
    /// A hold (set-up, stress or recovery) failed in the engine: which, and why.
    Hold(String),
}

impl fmt::Display for StressError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            StressError::Invalid(m) | StressError::NotFrozen(m) | StressError::Hold(m) => {
                f.write_str(m)
            }
            StressError::Ring(e) => write!(f, "{e}"),
        }
    }
}

impl std::error::Error for StressError {}

impl StressError {
    /// The error with the phase it happened in named first (an engine failure in a hold
    /// otherwise reads like one of the ring's own runs).
    fn during(self, phase: &str) -> Self {
        match self {
            StressError::Ring(RingError::Engine(e)) => {
                StressError::Hold(format!("{phase} failed: {e}"))
            }
            other => other,
        }
    }
}

impl From<RingError> for StressError {
    fn from(e: RingError) -> Self {
        StressError::Ring(e)
    }
}

impl From<lamina_engine::EngineError> for StressError {
    fn from(e: lamina_engine::EngineError) -> Self {
        StressError::Ring(RingError::Engine(e))
    }
}

/// The shortest time constant of any slow-trap state of the 2D-channel FETs in `design` (s),
/// or `None` when none has slow traps.
pub fn shortest_trap_time(design: &Design) -> Option<f64> {
    design
        .circuit
        .elements()
        .filter_map(|e| design.sheet_card(e))
        .flat_map(|card| card.slow_traps.iter().flat_map(|g| g.time_constants()))
        .min_by(f64::total_cmp)
}

/// The held levels of the single-defect pattern at supply `v`: stage outputs in ring order
/// (even stages at `v`), then the supply.
fn pattern(stages: usize, v: f64) -> Vec<f64> {
    (0..stages)
        .map(|i| if i % 2 == 0 { v } else { 0.0 })
        .chain(std::iter::once(v))
        .collect()
}

/// A state of the held circuit: every unknown, and the held levels it sits at.
#[derive(Clone)]
struct HeldState {
    x: Vec<f64>,
    levels: Vec<f64>,
}

/// The ring with every stage output pinned by a source (see the module doc).
struct Held {
    system: System,
    /// The pinning sources in ring order, then the supply.
    sources: Vec<ElementId>,
    steps: usize,
}

impl Held {
    /// Pins every stage output of `circuit` (a copy of the ring's circuit) and checks that the
    /// unknowns of `ring_system` lead the held circuit's in the same order.
    fn new(mut circuit: Circuit, ring: &Ring, ring_system: &System) -> Result<Held, StressError> {
        let invalid = |e: lamina_engine::CircuitError| {
            StressError::Invalid(format!("cannot pin the ring's stage outputs: {e}"))
        };
        let mut sources = Vec::with_capacity(ring.outputs.len() + 1);
        for (i, &node) in ring.outputs.iter().enumerate() {
            sources.push(
                circuit
                    .add(
                        &format!("stress.pin[{i}]"),
                        VoltageSource::dc(0.0),
                        &[node, Circuit::GROUND],
                    )
                    .map_err(invalid)?,
            );
        }
        sources.push(ring.supply);
        let system = System::new(circuit)?;
        let n = ring_system.unknown_count();
        let same = system.unknown_count() == n + ring.outputs.len()
            && (0..n).all(|i| system.unknown_name(i) == ring_system.unknown_name(i));
        if !same {
            return Err(StressError::Invalid(
                "the held copy of the ring does not have the ring's unknowns in the ring's order"
                    .into(),
            ));
        }
        Ok(Held {
            system,
            sources,
            steps: 0,
        })
    }

    /// Sets every source to ramp from `from` to `to` over [`RAMP`] (or to stay put).
    fn set_levels(&mut self, from: &[f64], to: &[f64]) -> Result<(), StressError> {
        for ((&e, &a), &b) in self.sources.iter().zip(from).zip(to) {
            let w = if a == b {
                Waveform::Constant(b)
            } else {
                Waveform::piecewise_linear(vec![(0.0, a), (RAMP, b)])
                    .map_err(|e| StressError::Invalid(e.to_string()))?
            };
            self.system.set_waveform(e, &w)?;
        }
        Ok(())
    }

    /// The unpowered ring at rest: the operating point with every held level at 0 V.
    fn rest(&mut self) -> Result<HeldState, StressError> {
        let zero = vec![0.0; self.sources.len()];
        self.set_levels(&zero, &zero)?;
        let (sol, _) = self.system.operating_point(&OpParams::default())?;
        Ok(HeldState {
            x: sol.x,
            levels: zero,
        })
    }

    /// Continues from `from`, ramped to the held levels `to` and held there for `duration`
    /// (ramp included). Second-order backward differentiation: L-stable, so the stiff device
    /// charges do not ring when the steps grow to the traps' time scale.
    fn hold(
        &mut self,
        from: &HeldState,
        to: Vec<f64>,
        duration: f64,
    ) -> Result<HeldState, StressError> {
        self.set_levels(&from.levels, &to)?;
        let mut tp = TransientParams::new(duration);
        tp.integrator = Integrator::Bdf2;
        tp.output = Output::Streaming;
        tp.min_step = Some(RAMP * 1e-6);
        let res = self
            .system
            .transient(&tp, &Start::State(from.x.clone()), &[], None)?;
        self.steps += res.stats.accepted;
        Ok(HeldState {
            x: res.end_state,
            levels: to,
        })
    }
}

/// Runs the stress plan on the ring in `system` (compiled from the ring's circuit), with
/// `held_circuit` a second copy of that same circuit, and `shortest_trap_time_s` the shortest
/// trap time constant of its devices ([`shortest_trap_time`]).
pub fn run_stress(
    system: &mut System,
    held_circuit: Circuit,
    ring: &Ring,
    params: &RingParams,
    plan: &StressPlan,
    shortest_trap_time_s: Option<f64>,
) -> Result<StressReport, StressError> {
    plan.check().map_err(StressError::Invalid)?;
    if params.edge {
        return Err(StressError::Invalid(
            "the drift after a stress is measured over whole periods, not by edge travel: one \
             pass of the edge sees one of each stage's two transitions, which the stress shifts \
             differently"
                .into(),
        ));
    }
    let mut recovery = plan.recovery_s.clone();
    recovery.sort_by(f64::total_cmp);
    recovery.dedup();
    let stages = ring.outputs.len();
    let n = system.unknown_count();
    let mut held = Held::new(held_circuit, ring, system)?;
    let nominal = pattern(stages, ring.vdd);
    let mut measure = |held: &mut Held, from: &HeldState| -> Result<RingReport, StressError> {
        let set = held
            .hold(from, nominal.clone(), SETTLE)
            .map_err(|e| e.during("the set-up hold before a measurement"))?;
        let start = Start::State(set.x[..n].to_vec());
        let report = run_ring_from(system, ring, params, &start)?;
        if let Some(tau) = shortest_trap_time_s {
            let window = SETTLE + report.simulated;
            if window > FROZEN_FRACTION * tau {
                return Err(StressError::NotFrozen(format!(
                    "the measurement ({window:.3e} s with its set-up) is not short against the \
                     shortest trap time constant ({tau:.3e} s; it must stay under {} % of it), \
                     so the traps would move while the frequency is measured",
                    FROZEN_FRACTION * 100.0
                )));
            }
        }
        Ok(report)
    };
    let rest = held.rest()?;
    let fresh = measure(&mut held, &rest)?;
    let stressed_state = held
        .hold(&rest, pattern(stages, plan.supply_v), plan.time_s)
        .map_err(|e| e.during(&format!("the stress hold at {} V", plan.supply_v)))?;
    let stressed = measure(&mut held, &stressed_state)?;
    let zero = vec![0.0; stages + 1];
    let mut state = stressed_state;
    let mut since = 0.0;
    let mut recovered = Vec::with_capacity(recovery.len());
    for &t in &recovery {
        state = held
            .hold(&state, zero.clone(), t - since)
            .map_err(|e| e.during(&format!("the recovery hold until {t:e} s")))?;
        since = t;
        recovered.push(Recovered {
            recovery_s: t,
            ring: measure(&mut held, &state)?,
        });
    }
    Ok(StressReport {
        supply_v: ring.vdd,
        plan: StressPlan {
            recovery_s: recovery,
            ..plan.clone()
        },
        shortest_trap_time_s,
        fresh,
        stressed,
        recovered,
        hold_steps: held.steps,
    })
}
