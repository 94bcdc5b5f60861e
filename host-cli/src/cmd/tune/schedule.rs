//! How `headroom tune` runs its (candidate, log) replays: in parallel
//! (rayon), in groups of one log and several candidates. A group opens its
//! log once, resolves each candidate's settings against the log's header,
//! and decodes the log once, a batch of records at a time, running every
//! candidate over each batch: constant memory, and a log is read once per
//! group instead of once per candidate.

use std::path::Path;

use headroom::control::{CheckedRecord, Summary};

use crate::error::{CliError, CliResult};
use crate::fleet::settings::Resolver;
use crate::fleet::{self, HostReplay};
use crate::logio::{HeaderStatus, ReadOptions};
use headroom::energy::{EnergyProfile, ReplayEnergy};

use super::sweep::Grid;

/// Records decoded at a time and run through every candidate of a group
/// before the next ones are read (a few hundred kB per thread).
const BATCH: usize = 4096;

/// Distinct checks of a batch kept at once (each 4 096 × 20 bytes): beyond
/// this many different plausibility settings in a group, a candidate checks
/// its records itself.
const SHARED_CHECKS: usize = 4;

/// One finished (candidate, log) replay.
pub struct Done {
    /// Its totals.
    pub summary: Summary,
    /// The log's target outage under the candidate's settings.
    pub target: f32,
    /// Warnings about the log (damage, settings), already naming the log.
    pub warnings: Vec<String>,
    /// What its packets cost, with an energy profile.
    pub energy: Option<ReplayEnergy>,
}

/// Replay the log `path` under the candidates `cands` (with their job
/// numbers), decoding it once; the result of every job, in the order given.
pub fn replay_group(
    path: &Path,
    opts: &ReadOptions,
    resolver: &Resolver,
    grid: &Grid,
    profile: Option<&EnergyProfile>,
    cands: &[(usize, usize)],
) -> Vec<(usize, CliResult<Done>)> {
    let mut out = Vec::with_capacity(cands.len());
    let mut reader = match crate::logio::open_with(path, opts) {
        Ok(r) => r,
        Err(e) => return cands.iter().map(|&(j, _)| (j, Err(e.clone()))).collect(),
    };
    let header = reader.header().copied();
    let damaged = matches!(reader.header_status(), HeaderStatus::Damaged { .. });
    type Live = (
        usize,
        HostReplay,
        f32,
        Vec<String>,
        Option<ReplayEnergy>,
        crate::rates::Remap,
    );
    let mut live: Vec<Live> = Vec::with_capacity(cands.len());
    for &(j, cand) in cands {
        let r = grid.layer(cand).and_then(|extra| {
            let s = resolver.resolve(path, header.as_ref(), damaged, Some(&extra))?;
            let cfg = s.resolved.config;
            let replay = match profile {
                Some(p) => HostReplay::with_energy(cfg, p),
                None => HostReplay::new(cfg),
            }
            .map_err(|e| {
                CliError::Input(format!("{}: controller settings: {e}", path.display()))
            })?;
            let remap =
                crate::rates::Remap::new(&header.map(|h| h.rates).unwrap_or_default(), &cfg.rates);
            Ok((replay, cfg.target_outage, s.warnings, remap))
        });
        match r {
            Ok((replay, target, warnings, remap)) => live.push((
                j,
                replay,
                target,
                warnings,
                profile.map(|_| ReplayEnergy::new(None)),
                remap,
            )),
            Err(e) => out.push((j, Err(e))),
        }
    }
    if live.is_empty() {
        return out;
    }
    // Candidates that check records alike (the same plausibility bounds:
    // all of them unless those are swept) share one check of each record:
    // 130 of the 940 x86 instructions of a record-update (callgrind).
    let mut shared: Vec<(Box<HostReplay>, Vec<CheckedRecord>)> = Vec::new();
    let mut slots: Vec<Option<usize>> = Vec::with_capacity(live.len());
    for (_, replay, ..) in &live {
        let slot = match shared.iter().position(|(c, _)| c.checks_like(replay)) {
            Some(k) => Some(k),
            None if shared.len() < SHARED_CHECKS => {
                shared.push((Box::new(*replay), Vec::with_capacity(BATCH)));
                Some(shared.len() - 1)
            }
            None => None,
        };
        slots.push(slot);
    }
    let mut batch = Vec::with_capacity(BATCH);
    loop {
        batch.clear();
        let mut failed = None;
        for rec in reader.by_ref() {
            match rec {
                Ok(r) => {
                    batch.push(r);
                    if batch.len() == BATCH {
                        break;
                    }
                }
                Err(e) => {
                    failed = Some(e);
                    break;
                }
            }
        }
        for (checker, checks) in &mut shared {
            checks.clear();
            checks.extend(batch.iter().map(|r| checker.check(r)));
        }
        for ((_, replay, _, _, energy, remap), slot) in live.iter_mut().zip(&slots) {
            let checks = slot.and_then(|k| shared.get(k)).map(|(_, c)| c);
            for (i, rec) in batch.iter().enumerate() {
                let mut rec = *rec;
                match remap.apply(rec.rate) {
                    Ok(r) => rec.rate = r,
                    Err(why) => {
                        failed.get_or_insert(CliError::Input(format!(
                            "{}: record at t_ms {}: {why}",
                            path.display(),
                            rec.t_ms
                        )));
                        break;
                    }
                }
                let rec = &rec;
                let step = match checks.and_then(|c| c.get(i)) {
                    Some(checked) => replay.step_checked(rec, checked),
                    None => replay.step(rec),
                };
                if let (Some(e), Some(p)) = (energy.as_mut(), profile) {
                    if let Err(err) = e.add(p, rec, &step) {
                        let why = crate::energy::refusal(&err, "--energy", "--interval", &[]);
                        failed.get_or_insert(CliError::Input(format!(
                            "{}: record at t_ms {}: {why}",
                            path.display(),
                            rec.t_ms
                        )));
                        break;
                    }
                }
            }
        }
        if let Some(e) = failed {
            out.extend(live.into_iter().map(|(j, ..)| (j, Err(e.clone()))));
            return out;
        }
        if batch.len() < BATCH {
            break;
        }
    }
    // Bounded: the reader keeps the first damaged regions in detail and
    // counts the rest.
    let damage: Vec<String> = reader.warnings();
    out.extend(
        live.into_iter()
            .map(|(j, replay, target, warnings, energy, _)| {
                let mut w: Vec<String> = warnings
                    .into_iter()
                    .map(|w| format!("{}: {w}", path.display()))
                    .collect();
                w.extend(damage.iter().cloned());
                (
                    j,
                    Ok(Done {
                        summary: *replay.summary(),
                        target,
                        warnings: w,
                        energy,
                    }),
                )
            }),
    );
    out
}

/// The jobs `start..end` (job `j` is candidate `j / nlogs` on log
/// `j % nlogs`) as groups of one log and several (job, candidate): every
/// log's candidates split into `per_log` groups, so that a few logs still
/// keep all threads busy while each group decodes its log once.
pub fn group_jobs(
    start: usize,
    end: usize,
    nlogs: usize,
    per_log: usize,
) -> Vec<(usize, Vec<(usize, usize)>)> {
    let mut by_log: Vec<Vec<(usize, usize)>> = vec![Vec::new(); nlogs];
    for j in start..end {
        if let Some(v) = by_log.get_mut(j % nlogs) {
            v.push((j, j / nlogs));
        }
    }
    let mut groups = Vec::new();
    for (log, js) in by_log.into_iter().enumerate() {
        if js.is_empty() {
            continue;
        }
        let size = js.len().div_ceil(per_log.max(1));
        for g in js.chunks(size.max(1)) {
            groups.push((log, g.to_vec()));
        }
    }
    groups
}

/// Refuse a log `tune` cannot read several times (a pipe, a terminal):
/// every group of candidates opens its log again.
pub fn check_rereadable(path: &Path) -> CliResult {
    match std::fs::metadata(path) {
        Ok(m) if m.is_file() => Ok(()),
        Ok(_) => Err(CliError::arg(
            "LOG",
            format!(
                "{}: tune reads each log once per group of candidates: name a regular file \
                 (copy a pipe or standard input to a file first, or use replay)",
                path.display()
            ),
        )),
        Err(e) => Err(CliError::input_file(path, "cannot open", &e)),
    }
}

/// Check the grid against the first log before any replay: every
/// candidate's settings resolve.
pub fn check_grid(path: &Path, opts: &ReadOptions, resolver: &Resolver, grid: &Grid) -> CliResult {
    let reader = crate::logio::open_with(path, opts)?;
    let header = reader.header().copied();
    let damaged = matches!(reader.header_status(), HeaderStatus::Damaged { .. });
    for cand in 0..=grid.len {
        let extra = grid.layer(cand)?;
        fleet::settings::Resolver::resolve(resolver, path, header.as_ref(), damaged, Some(&extra))
            .map_err(|e| match cand {
                0 => e,
                _ => CliError::arg(
                    "--sweep",
                    format!("{}: the controller refuses it: {e}", grid.label(cand)),
                ),
            })?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn groups_cover_every_job_once() {
        let g = group_jobs(0, 12, 3, 2);
        let mut all: Vec<usize> = g
            .iter()
            .flat_map(|(_, js)| js.iter().map(|x| x.0))
            .collect();
        all.sort_unstable();
        assert_eq!(all, (0..12).collect::<Vec<_>>());
        for (log, js) in &g {
            for (j, c) in js {
                assert_eq!((j % 3, j / 3), (*log, *c));
            }
        }
    }
}
