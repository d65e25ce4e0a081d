//! `lamina materials [NAME]`: the material library (channels, insulators, gate electrodes)
//! with every value, its unit and its cited source. Without a name: an overview table per
//! group; with one: every value of that entry; `--json`: the entries whole, each key carrying
//! its unit.

use crate::describe::json_key;
use crate::error::JobError;
use crate::out;
use lamina_devices::materials::{self, LibraryValue, SECTIONS};
use lamina_netlist::diag::did_you_mean;
use serde_json::{json, Map, Value};

/// Flags of `lamina materials`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// A library entry (`MoS2`, `hBN`, `graphene`, ...); every value with its unit and
    /// source. Without it, an overview of the whole library.
    pub name: Option<String>,
    /// Print one JSON object instead of tables.
    #[arg(long)]
    pub json: bool,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    match a.name {
        None if a.json => out!("{}", library_json()),
        None => print_overview(),
        Some(name) => {
            let (section, entry) = find(&name)?;
            let values = materials::values(section, &entry).map_err(JobError::Usage)?;
            if a.json {
                out!(
                    "{}",
                    json!({
                        "section": section,
                        "name": entry,
                        "values": entry_json(section, &entry, &values),
                    })
                );
            } else {
                print_entry(section, &entry, &values);
            }
        }
    }
    Ok(())
}

/// A number for a table: six significant digits, plain between 1e-3 and 1e6, otherwise in
/// exponent form (`3.33e-10`).
pub(crate) fn num(x: f64) -> String {
    let r: f64 = format!("{x:.5e}").parse().unwrap_or(x);
    if r == 0.0 {
        "0".into()
    } else if (1e-3..1e6).contains(&r.abs()) {
        format!("{r}")
    } else {
        format!("{r:e}")
    }
}

/// `channel`, `insulator` or `gate` for a library section.
pub(crate) fn section_singular(section: &str) -> &str {
    section.strip_suffix('s').unwrap_or(section)
}

fn entries(section: &str) -> Vec<String> {
    match section {
        "channels" => materials::channels(),
        "insulators" => materials::insulators(),
        _ => materials::gates(),
    }
}

/// The section and exact name of the entry `name` (matched exactly, else ignoring case), or a
/// usage error suggesting the closest names.
fn find(name: &str) -> Result<(&'static str, String), JobError> {
    let all: Vec<(&'static str, String)> = SECTIONS
        .iter()
        .flat_map(|s| entries(s).into_iter().map(move |n| (*s, n)))
        .collect();
    let exact = all.iter().find(|(_, n)| n == name);
    let folded: Vec<_> = all
        .iter()
        .filter(|(_, n)| n.to_lowercase() == name.to_lowercase())
        .collect();
    match (exact, folded.as_slice()) {
        (Some(hit), _) | (None, &[hit]) => Ok(hit.clone()),
        _ => {
            let hint = did_you_mean(name, all.iter().map(|(_, n)| n.as_str()))
                .map(|h| format!("; {h}"))
                .unwrap_or_default();
            let known: Vec<String> = SECTIONS
                .iter()
                .map(|s| format!("{s}: {}", entries(s).join(", ")))
                .collect();
            Err(JobError::Usage(format!(
                "no material called `{name}` in the library{hint} (it has {})",
                known.join("; ")
            )))
        }
    }
}

fn value_of<'a>(values: &'a [LibraryValue], key: &str) -> Option<&'a LibraryValue> {
    values.iter().find(|v| v.key == key)
}

/// A value for the overview, or `-` where the entry has none.
fn cell(values: &[LibraryValue], key: &str) -> String {
    value_of(values, key).map_or("-".into(), |v| num(v.value))
}

/// A mass for the overview: the isotropic one, or the pair per transport direction.
fn mass_cell(name: &str, values: &[LibraryValue], carrier: &str) -> String {
    let dirs = materials::transport_directions(name).unwrap_or_default();
    if dirs.is_empty() {
        return cell(values, &format!("{carrier}_mass"));
    }
    dirs.iter()
        .map(|d| format!("{} {d}", cell(values, &format!("{carrier}_mass_{d}"))))
        .collect::<Vec<_>>()
        .join(", ")
}

fn print_overview() {
    out!("material library (values are cited model inputs: `lamina materials NAME` shows every value with its source)");
    out!("\nchannels");
    out!(
        "  {:<8} {:>10} {:>10} {:>24} {:>24} {:>5} {:>5}",
        "name",
        "E_g (eV)",
        "chi (eV)",
        "m_e (m0)",
        "m_h (m0)",
        "g_e",
        "g_h"
    );
    for name in materials::channels() {
        let v = materials::values("channels", &name).unwrap_or_default();
        out!(
            "  {:<8} {:>10} {:>10} {:>24} {:>24} {:>5} {:>5}",
            name,
            cell(&v, "band_gap"),
            cell(&v, "electron_affinity"),
            mass_cell(&name, &v, "electron"),
            mass_cell(&name, &v, "hole"),
            cell(&v, "electron_degeneracy"),
            cell(&v, "hole_degeneracy")
        );
    }
    out!("\ninsulators");
    out!(
        "  {:<8} {:>8} {:>14} {:>16} {:>18}",
        "name",
        "eps_r",
        "eps_r range",
        "layer (m)",
        "breakdown (V/m)"
    );
    for name in materials::insulators() {
        let v = materials::values("insulators", &name).unwrap_or_default();
        let range = value_of(&v, "permittivity")
            .and_then(|p| p.range)
            .map_or("-".into(), |(lo, hi)| format!("{} .. {}", num(lo), num(hi)));
        out!(
            "  {:<8} {:>8} {:>14} {:>16} {:>18}",
            name,
            cell(&v, "permittivity"),
            range,
            cell(&v, "layer_thickness"),
            cell(&v, "breakdown_field")
        );
    }
    out!("\ngates");
    out!(
        "  {:<8} {:<6} {:>20} {:>16}",
        "name",
        "kind",
        "work function (eV)",
        "v_F (m/s)"
    );
    for name in materials::gates() {
        let v = materials::values("gates", &name).unwrap_or_default();
        let kind = materials::gate_kind(&name).unwrap_or("-");
        let wf = value_of(&v, "work_function")
            .or_else(|| value_of(&v, "neutral_work_function"))
            .map_or("-".into(), |x| num(x.value));
        out!(
            "  {:<8} {:<6} {:>20} {:>16}",
            name,
            kind,
            wf,
            cell(&v, "fermi_velocity")
        );
    }
}

fn print_entry(section: &str, name: &str, values: &[LibraryValue]) {
    let kind = materials::gate_kind(name)
        .map(|k| format!(" ({k})"))
        .unwrap_or_default();
    out!("{} {name}{kind}", section_singular(section));
    for v in values {
        let unit = materials::unit(v.key).unwrap_or("?");
        let range = v
            .range
            .map(|(lo, hi)| format!("  (source range {} .. {})", num(lo), num(hi)))
            .unwrap_or_default();
        out!("  {:<42} {:>12} {unit}{range}", v.key, num(v.value));
        out!("      source: {}", v.source);
    }
}

/// One entry as JSON: each value under its key with the unit appended (`band_gap_ev`), with
/// its unit, source and range; a gate's `kind` as it is.
fn entry_json(section: &str, name: &str, values: &[LibraryValue]) -> Value {
    let mut m = Map::new();
    if section == "gates" {
        m.insert("kind".into(), json!(materials::gate_kind(name)));
    }
    for v in values {
        let unit = materials::unit(v.key).unwrap_or("1");
        m.insert(
            json_key(v.key, unit),
            json!({
                "value": v.value,
                "unit": unit,
                "range": v.range.map(|(lo, hi)| [lo, hi]),
                "source": v.source,
            }),
        );
    }
    Value::Object(m)
}

fn library_json() -> Value {
    let mut m = Map::new();
    for s in SECTIONS {
        let group: Map<String, Value> = entries(s)
            .into_iter()
            .map(|n| {
                let values = materials::values(s, &n).unwrap_or_default();
                let v = entry_json(s, &n, &values);
                (n, v)
            })
            .collect();
        m.insert(s.to_string(), Value::Object(group));
    }
    m.insert(
        "units".into(),
        json!("each key ends in its unit: _ev electronvolts, _m0 free-electron masses, _m metres, _m_per_s, _v_per_m, _j_per_m2, _k kelvin, _ev_per_k; keys without a unit are pure numbers (degeneracies, exponents, relative permittivities)"),
    );
    Value::Object(m)
}
