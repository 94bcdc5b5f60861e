//! Instructions per controller update, from the `cost` firmware under
//! `qemu -icount shift=0` (see firmware-demo/src/bin/cost.rs).

use std::collections::HashMap;

use super::{Board, Ctx};

/// Readings in the controller window the firmware measures: the engine's.
pub const WINDOW: usize = headroom::control::REPLAY_WINDOW;

/// What the `cost` firmware reported.
#[derive(Debug, Clone, Copy)]
pub struct Cost {
    /// `size_of::<Controller<32>>()` on the target.
    pub controller_state_bytes: u64,
    /// Mean instructions per update × 1000, in the steady state (window and
    /// spread memory full).
    pub update_mean_milli: u64,
    /// Mean instructions per update × 1000 over the first updates of a
    /// fresh controller (warm-up, the window filling, the first power
    /// changes).
    pub update_fresh_mean_milli: u64,
    /// Upper bound on the slowest single update, instructions.
    pub update_max_upper: u64,
    /// Mean instructions per replay step × 1000.
    pub replay_step_mean_milli: u64,
    /// Mean instructions per encoded decision frame × 1000.
    pub encode_mean_milli: u64,
    /// Updates per timed pass.
    pub updates_timed: u64,
    /// Packets of the closed loop between the fresh pass and the
    /// steady-state pass.
    pub settle_packets: u64,
    /// Peak stack use of the cost firmware, bytes.
    pub stack_peak_bytes: u64,
    /// Rates of the table in the pass with rates in play.
    pub rates_in_table: u64,
    /// Mean instructions per update × 1000 with rates in play (the live
    /// demo's rates, energy profile and duty budget), steady state.
    pub rates_update_mean_milli: u64,
    /// Upper bound on the slowest update of that pass, instructions.
    pub rates_update_max_upper: u64,
}

/// Run the `cost` firmware on `board` and parse its `key=value` lines.
pub fn measure(ctx: &Ctx, board: &Board) -> Result<Cost, String> {
    let elf = ctx.elf(board, "cost");
    let out = ctx.run_qemu(ctx.qemu(board, &elf, true, None), "cost")?;
    let text = String::from_utf8_lossy(&out);
    let map: HashMap<&str, &str> = text
        .lines()
        .filter_map(|l| l.split_once('='))
        .map(|(k, v)| (k.trim(), v.trim()))
        .collect();
    let num = |key: &str| -> Result<u64, String> {
        map.get(key)
            .ok_or_else(|| format!("cost firmware did not report `{key}`; it printed:\n{text}"))?
            .parse::<u64>()
            .map_err(|e| format!("cost firmware: `{key}`: {e}"))
    };
    if map.get("board").copied() != Some(board.machine) {
        return Err(format!(
            "cost firmware reports board {:?}, expected {}",
            map.get("board"),
            board.machine
        ));
    }
    if num("window")? != WINDOW as u64 {
        return Err(format!(
            "cost firmware measures a window of {}, expected {WINDOW}",
            num("window")?
        ));
    }
    let c = Cost {
        controller_state_bytes: num("controller_state_bytes")?,
        update_mean_milli: num("update_mean_milli_instructions")?,
        update_fresh_mean_milli: num("update_fresh_mean_milli_instructions")?,
        update_max_upper: num("update_max_instructions_upper")?,
        replay_step_mean_milli: num("replay_step_mean_milli_instructions")?,
        encode_mean_milli: num("encode_decision_mean_milli_instructions")?,
        updates_timed: num("updates_timed")?,
        settle_packets: num("settle_packets")?,
        stack_peak_bytes: num("stack_peak_bytes")?,
        rates_in_table: num("rates_in_table")?,
        rates_update_mean_milli: num("rates_update_mean_milli_instructions")?,
        rates_update_max_upper: num("rates_update_max_instructions_upper")?,
    };
    if c.update_mean_milli == 0 {
        return Err("cost firmware measured 0 instructions per update: was -icount active?".into());
    }
    println!(
        "{}: {:.1} instructions per update (mean, steady state), {:.1} (mean from a fresh start), ≤ {} (slowest); \
         with {} rates and a duty budget: {:.1} (mean, steady state), ≤ {} (slowest)",
        board.machine,
        c.update_mean_milli as f64 / 1000.0,
        c.update_fresh_mean_milli as f64 / 1000.0,
        c.update_max_upper,
        c.rates_in_table,
        c.rates_update_mean_milli as f64 / 1000.0,
        c.rates_update_max_upper
    );
    Ok(c)
}
