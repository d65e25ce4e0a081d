//! Batch fits: the same keys fitted to each device of a wafer or a lot on its own, one fit per
//! data file or per name in a data file's `device` column, and statistics of the fitted values
//! across the devices.
//!
//! # Devices
//! [`members`] turns data files into the batch's devices, in order: the files in the order
//! given, and within a file with a `device` column its names in order of first appearance. A
//! file without the column is one device named by the file's stem (`die07.csv` is `die07`);
//! a name in the column names its device (`die07`), prefixed by the file's stem when there
//! are several files (`lot3/die07`). Two devices of one name are refused.
//!
//! # Determinism
//! Each device's fit is [`super::fit_prepared`] on its own rows alone (its own model, its own
//! reads of the card file), so its result depends on its rows, the card file and the settings,
//! never on which thread or machine ran it or which other devices ran beside it. The card is
//! checked once for the batch ([`prepare`]). Devices run in parallel with rayon and come back
//! in device order; any contiguous range of devices gives exactly those rows of the whole
//! batch, which is what a shard needs ([`crate::montecarlo::shard_range`]).

use super::{fit_prepared, has_geometry, CardFacts, FitConfig, FitFailure, Outcome};
use crate::montecarlo::{stable_hash, stats, Stats};
use indicatif::ParallelProgressIterator;
use lamina_netlist::table::{Direction, Table};
use lamina_netlist::Design;
use rayon::prelude::*;
use std::ops::Range;
use std::path::Path;

/// One device of a batch.
#[derive(Clone, Debug, PartialEq)]
pub struct Member {
    /// Its name (see the module documentation).
    pub label: String,
    /// The data file its rows come from, as given.
    pub source: String,
    /// Its rows, in file order.
    pub table: Table,
}

/// One device's fit.
#[derive(Clone, Debug)]
pub struct DeviceFit {
    /// The device.
    pub member: Member,
    /// Its fit, or why the fit failed.
    pub result: Result<Outcome, String>,
}

/// The devices of data files (`(file as given, its table)`, in order); see the module
/// documentation for the names. `Err` says which two devices share a name.
pub fn members(files: &[(String, Table)]) -> Result<Vec<Member>, String> {
    let several = files.len() > 1;
    let mut out: Vec<Member> = Vec::new();
    for (source, table) in files {
        let stem = Path::new(source)
            .file_stem()
            .map_or_else(|| source.clone(), |s| s.to_string_lossy().into_owned());
        let part = |rows: Vec<lamina_netlist::table::Row>| Table {
            rows,
            per_width: table.per_width,
            headers: table.headers.clone(),
            devices: Vec::new(),
        };
        let mut found: Vec<Member> = if table.devices.is_empty() {
            vec![Member {
                label: stem.clone(),
                source: source.clone(),
                table: part(table.rows.clone()),
            }]
        } else {
            table
                .devices
                .iter()
                .enumerate()
                .map(|(k, name)| Member {
                    label: if several {
                        format!("{stem}/{name}")
                    } else {
                        name.clone()
                    },
                    source: source.clone(),
                    table: part(
                        table
                            .rows
                            .iter()
                            .filter(|r| r.device == Some(k))
                            .copied()
                            .collect(),
                    ),
                })
                .collect()
        };
        for m in &found {
            if let Some(other) = out.iter().find(|o| o.label == m.label) {
                return Err(format!(
                    "two devices are named `{}` ({} and {}): give the data files distinct \
                     names, or the devices distinct names in their `device` column",
                    m.label, other.source, m.source
                ));
            }
        }
        out.append(&mut found);
    }
    Ok(out)
}

/// Checks the card file at `card` once for every device of the batch ([`super::prepare`]).
pub fn prepare(card: &Path, members: &[Member], cfg: &FitConfig) -> Result<CardFacts, FitFailure> {
    super::prepare(card, cfg, members.iter().any(|m| has_geometry(&m.table)))
}

/// Fits the devices `range` of `members` with the card file at `card` (checked by [`prepare`],
/// which read `facts`), in parallel, and returns them in device order. `progress` shows a bar
/// on stderr (hidden when stderr is not a terminal).
pub fn run_batch(
    card: &Path,
    members: &[Member],
    range: Range<usize>,
    cfg: &FitConfig,
    facts: &CardFacts,
    progress: bool,
) -> Vec<DeviceFit> {
    let chosen = &members[range.start.min(members.len())..range.end.min(members.len())];
    let bar = crate::sweep::progress_bar(chosen.len(), "devices", progress);
    chosen
        .par_iter()
        .progress_with(bar)
        .map(|m| DeviceFit {
            member: m.clone(),
            result: fit_prepared(card, &m.table, cfg, facts),
        })
        .collect()
}

/// The hash of what a batch's results depend on, as 16 hex digits: the text of every file
/// the card file read (in load order; paths left out, so the same files elsewhere hash the
/// same), every device's name and rows as read (line, voltages, current, direction, length
/// and width, bit for bit), and the fit's settings as given. See
/// [`crate::montecarlo::stable_hash`].
pub fn inputs_hash(card: &Design, members: &[Member], settings: &[String]) -> String {
    let sources = &card.sources;
    let mut pieces: Vec<Vec<u8>> = (0..sources.len())
        .map(|i| sources.text(i).as_bytes().to_vec())
        .collect();
    pieces.push(b"devices".to_vec());
    for m in members {
        pieces.push(m.label.as_bytes().to_vec());
        let mut rows = Vec::with_capacity(m.table.rows.len() * 56);
        for r in &m.table.rows {
            let opt = |x: Option<f64>| x.map_or(u64::MAX, f64::to_bits);
            let direction = match r.direction {
                None => 0u64,
                Some(Direction::Up) => 1,
                Some(Direction::Down) => 2,
            };
            for word in [
                r.line as u64,
                r.vgs.to_bits(),
                r.vds.to_bits(),
                r.id.to_bits(),
                direction,
                opt(r.length_m),
                opt(r.width_m),
            ] {
                rows.extend_from_slice(&word.to_le_bytes());
            }
        }
        pieces.push(rows);
    }
    pieces.push(b"settings".to_vec());
    pieces.extend(settings.iter().map(|s| s.as_bytes().to_vec()));
    format!("{:016x}", stable_hash(pieces.iter().map(Vec::as_slice)))
}

/// Statistics of fitted key `k` over the devices whose fit succeeded (mean, standard
/// deviation, quantiles: [`crate::montecarlo::stats`]); `None` when none did.
pub fn across(fits: &[DeviceFit], k: usize) -> Option<Stats> {
    let values: Vec<Option<f64>> = fits
        .iter()
        .map(|f| f.result.as_ref().ok().map(|o| o.fit.values[k]))
        .collect();
    stats(&values)
}

#[cfg(test)]
mod tests {
    use super::*;
    use lamina_netlist::table::{parse_table, TableOptions};

    fn table(text: &str) -> Table {
        parse_table(text, &TableOptions::default()).unwrap()
    }

    #[test]
    fn devices_are_named_by_file_or_by_column_and_names_must_differ() {
        let plain = table("V_GS (V), V_DS (V), I_D (A)\n1, 0.1, 1e-6\n");
        let named =
            table("device, V_GS (V), V_DS (V), I_D (A)\nb, 1, 0.1, 1e-6\na, 1, 0.1, 1e-6\n");
        let one = members(&[("lot/w1.csv".into(), named.clone())]).unwrap();
        let labels: Vec<&str> = one.iter().map(|m| m.label.as_str()).collect();
        assert_eq!(labels, ["b", "a"]);
        assert!(one.iter().all(|m| m.table.rows.len() == 1));
        let two = members(&[
            ("x/d7.csv".into(), plain.clone()),
            ("lot/w1.csv".into(), named.clone()),
        ])
        .unwrap();
        let labels: Vec<&str> = two.iter().map(|m| m.label.as_str()).collect();
        assert_eq!(labels, ["d7", "w1/b", "w1/a"]);
        let twice = members(&[
            ("x/d7.csv".into(), plain.clone()),
            ("y/d7.csv".into(), plain),
        ]);
        assert!(twice.unwrap_err().contains("`d7`"));
    }
}
