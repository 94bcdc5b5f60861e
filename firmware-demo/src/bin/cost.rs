//! Cost of the controller on this core: instructions per update (and per
//! replay step and per decision frame), measured with SysTick. The update is
//! timed twice over the closed loop of the simulated link: from a fresh
//! controller (warm-up, the window filling) and in the steady state, after
//! `SETTLE` more packets (`update_mean_milli_instructions`, the figure the
//! goal is judged on). Run under
//! `qemu-system-arm -icount shift=0` (one instruction per ns of virtual
//! time), where the counts are exact and repeat run after run; elsewhere
//! they are meaningless. Prints `key=value` lines for `cargo xtask`.
#![no_std]
#![no_main]

use core::hint::black_box;

use cortex_m_rt::entry;
use cortex_m_semihosting::hprintln;

use headroom::control::{Controller, Observation, Replay};
use headroom::energy::ChargeTable;
use headroom::record::codec::{encode_decision, MAX_FRAME};
use headroom::record::{DecisionRecord, LogRecord};
use headroom_firmware_demo::clock::{ticks_between, ticks_to_milli_instructions, Clock};
use headroom_firmware_demo::radio::{Radio, SimRadio};
use headroom_firmware_demo::{board, host, scenario, stack};

/// The replay window, the engine's one value.
use headroom::control::REPLAY_WINDOW as WINDOW;

/// Observations timed per pass (small enough for the microbit's 16 KiB RAM
/// beside the controllers, each with its rate table and duty window).
const N: usize = 32;

/// Packets of the closed loop between the fresh-start pass and the
/// steady-state pass: more than the default spread memory (512 readings),
/// so the window, the filters and the spread averages are all in their
/// steady state.
const SETTLE: usize = 1024;

#[entry]
fn main() -> ! {
    headroom_firmware_demo::stack::paint();
    let Some(p) = cortex_m::Peripherals::take() else {
        host::eprint("peripherals already taken\n");
        host::exit(false)
    };
    let clock = Clock::new(p.SYST);
    // Two passes one after the other (not nested: their frames share the
    // microbit's 16 KiB one at a time).
    let ok = run(&clock) && run_rates(&clock);
    hprintln!("stack_peak_bytes={}", stack::peak());
    hprintln!("stack_available_bytes={}", stack::available());
    host::exit(ok)
}

/// One packet of the closed loop with rates: sent at the controller's power
/// and rate (or the slot passes when the duty budget holds it); the
/// controller takes the outcome. Returns what it was fed.
fn rate_step<const W: usize>(radio: &mut SimRadio, ctrl: &mut Controller<W>) -> Option<Step> {
    if ctrl.is_held() {
        let t = radio.skip().ok()?;
        ctrl.held(t);
        return Some(Step::Held(t));
    }
    let ok = radio.set_tx_power(ctrl.tx()).is_ok()
        && radio.set_rate(ctrl.rate().unwrap_or(0)).is_ok()
        && radio.send(&[]).is_ok();
    if !ok {
        host::eprint("radio refused\n");
        return None;
    }
    let f = radio.feedback().ok()?;
    ctrl.update(&f);
    Some(Step::Sent(f))
}

/// What a packet slot fed the controller.
#[derive(Clone, Copy)]
enum Step {
    Sent(Observation),
    Held(u64),
}

/// The update with rates in play: the live demo's five rates, its energy
/// profile and a 10 % duty budget, over the demo's far link; the mean of
/// `N` updates in the steady state and the slowest.
#[inline(never)]
fn run_rates(clock: &Clock) -> bool {
    let (Ok(rates), Ok(energy)) = (scenario::rates(), scenario::energy_profile()) else {
        host::eprint("rate table or energy profile refused\n");
        return false;
    };
    let Ok(charge) = ChargeTable::from_profile(&energy) else {
        host::eprint("energy profile refused\n");
        return false;
    };
    let Ok(radio) = SimRadio::new(scenario::rate_channel(), scenario::SEED, scenario::RADIO) else {
        host::eprint("channel refused\n");
        return false;
    };
    let mut radio = radio.with_rates(rates);
    let cfg = scenario::controller_config_with_rates(&radio.capabilities(), rates);
    let Ok(mut ctrl) = Controller::<WINDOW>::with_charge(cfg, Some(charge)) else {
        host::eprint("controller settings refused\n");
        return false;
    };
    for _ in 0..SETTLE {
        if rate_step(&mut radio, &mut ctrl).is_none() {
            return false;
        }
    }
    let settled = ctrl;
    let mut fed = [Step::Held(0); N];
    for f in fed.iter_mut() {
        let Some(s) = rate_step(&mut radio, &mut ctrl) else {
            return false;
        };
        *f = s;
    }
    let t0 = clock.now();
    for f in fed.iter() {
        black_box(f);
    }
    let overhead = ticks_between(t0, clock.now());
    let mut c = settled;
    let t0 = clock.now();
    for f in fed.iter() {
        match *f {
            Step::Sent(o) => black_box(c.update(black_box(&o))),
            Step::Held(t) => black_box(c.held(black_box(t))),
        };
    }
    let ticks = ticks_between(t0, clock.now());
    let mut c = settled;
    let mut max_ticks = 0u32;
    let mut empty_max = 0u32;
    for _ in 0..8 {
        let t = clock.now();
        let u = clock.now();
        empty_max = empty_max.max(ticks_between(t, u));
    }
    let mut changes = 0u32;
    for f in fed.iter() {
        let before = c.rate();
        let t = clock.now();
        match *f {
            Step::Sent(o) => black_box(c.update(black_box(&o))),
            Step::Held(t) => black_box(c.held(black_box(t))),
        };
        let u = clock.now();
        max_ticks = max_ticks.max(ticks_between(t, u));
        changes += u32::from(c.rate() != before);
    }
    hprintln!("rates_in_table={}", rates.len());
    hprintln!("rates_changes_timed={}", changes);
    hprintln!(
        "rates_update_mean_milli_instructions={}",
        per_item(ticks, overhead, N)
    );
    hprintln!(
        "rates_update_max_instructions_upper={}",
        ticks_to_milli_instructions(u64::from(max_ticks.saturating_sub(empty_max) + 1)) / 1000
    );
    true
}

/// Instructions (×1000) per item for a span of `ticks` over `n` items,
/// less `overhead_ticks` of the same loop with an empty body.
fn per_item(ticks: u32, overhead_ticks: u32, n: usize) -> u64 {
    ticks_to_milli_instructions(u64::from(ticks.saturating_sub(overhead_ticks))) / n as u64
}

/// One packet of the closed loop: sent at the controller's power, the
/// radio's feedback back (`None`, said on stderr, if the radio refused).
fn closed_loop_step<const W: usize>(
    radio: &mut SimRadio,
    ctrl: &Controller<W>,
) -> Option<Observation> {
    if radio.set_tx_power(ctrl.tx()).is_err() || radio.send(&[]).is_err() {
        host::eprint("radio refused\n");
        return None;
    }
    match radio.feedback() {
        Ok(f) => Some(f),
        Err(_) => {
            host::eprint("no feedback\n");
            None
        }
    }
}

#[inline(never)]
fn run(clock: &Clock) -> bool {
    // 1. A closed loop over the simulated link records what the controller
    //    is fed; a fresh controller fed the same sequence makes the same
    //    decisions, so the timed passes below see the real mix of warm-up,
    //    tracking, losses and climbs.
    let Ok(mut radio) = SimRadio::new(scenario::channel(), scenario::SEED, scenario::RADIO) else {
        host::eprint("channel refused\n");
        return false;
    };
    let cfg = scenario::controller_config(&radio.capabilities());
    let Ok(mut ctrl) = Controller::<WINDOW>::new(cfg) else {
        host::eprint("controller settings refused\n");
        return false;
    };
    let mut obs = [Observation::Missing { t_ms: 0 }; N];
    let mut recs = [LogRecord::default(); N];
    for (o, r) in obs.iter_mut().zip(recs.iter_mut()) {
        let Some(f) = closed_loop_step(&mut radio, &ctrl) else {
            return false;
        };
        *o = f;
        if let Some(s) = radio.last_sample() {
            *r = s.record();
        }
        ctrl.update(&f);
    }

    // 2. Loop overhead: the same loop with nothing in it.
    let t0 = clock.now();
    for o in obs.iter() {
        black_box(o);
    }
    let overhead = ticks_between(t0, clock.now());

    // 3. All N updates in one span, from a fresh controller (warm-up, the
    //    window filling, the first power changes): the mean, to a fraction
    //    of an instruction.
    let Ok(mut ctrl) = Controller::<WINDOW>::new(cfg) else {
        return false;
    };
    let t0 = clock.now();
    for o in obs.iter() {
        black_box(ctrl.update(black_box(o)));
    }
    let batch = ticks_between(t0, clock.now());

    // 4. Each update in its own span: the largest, to one SysTick tick.
    let Ok(mut ctrl) = Controller::<WINDOW>::new(cfg) else {
        return false;
    };
    let mut empty_max = 0u32;
    for _ in 0..8 {
        let t = clock.now();
        let u = clock.now();
        empty_max = empty_max.max(ticks_between(t, u));
    }
    let mut max_ticks = 0u32;
    for o in obs.iter() {
        let t = clock.now();
        black_box(ctrl.update(black_box(o)));
        let u = clock.now();
        max_ticks = max_ticks.max(ticks_between(t, u));
    }

    // 5. One replay step per logged record (the replay on target).
    let Ok(mut replay) = Replay::<WINDOW>::new(cfg) else {
        return false;
    };
    let t0 = clock.now();
    for r in recs.iter() {
        black_box(replay.step(black_box(r)));
    }
    let replay_ticks = ticks_between(t0, clock.now());

    // 6. Encoding one decision frame.
    let mut buf = [0u8; MAX_FRAME];
    let t0 = clock.now();
    let mut frames_ok = true;
    for (i, r) in recs.iter().enumerate() {
        let d = DecisionRecord {
            t_ms: r.t_ms,
            tx_dbm: -3.0,
            outcome: 0,
            reason: 1,
            rate: None,
        };
        frames_ok &= black_box(encode_decision(i as u16, black_box(&d), &mut buf)).is_ok();
    }
    let encode_ticks = ticks_between(t0, clock.now());
    if !frames_ok {
        host::eprint("decision frame did not encode\n");
        return false;
    }

    // 7. Steady state: the same closed loop SETTLE packets further on, then
    //    N more observations, timed on a copy of the controller as it was
    //    before them (the window full, the spread memory full).
    for _ in 0..SETTLE {
        let Some(f) = closed_loop_step(&mut radio, &ctrl) else {
            return false;
        };
        ctrl.update(&f);
    }
    let settled = ctrl;
    for o in obs.iter_mut() {
        let Some(f) = closed_loop_step(&mut radio, &ctrl) else {
            return false;
        };
        *o = f;
        ctrl.update(&f);
    }
    let mut c = settled;
    let t0 = clock.now();
    for o in obs.iter() {
        black_box(c.update(black_box(o)));
    }
    let steady = ticks_between(t0, clock.now());
    let mut c = settled;
    for o in obs.iter() {
        let t = clock.now();
        black_box(c.update(black_box(o)));
        let u = clock.now();
        max_ticks = max_ticks.max(ticks_between(t, u));
    }

    let milli = 1_000_000_000_000u64 / u64::from(board::SYSTICK_HZ);
    hprintln!("board={}", board::BOARD);
    hprintln!("core={}", board::CORE);
    hprintln!("window={}", WINDOW);
    hprintln!("updates_timed={}", N);
    hprintln!("settle_packets={}", SETTLE);
    hprintln!(
        "controller_state_bytes={}",
        core::mem::size_of::<Controller<WINDOW>>()
    );
    hprintln!(
        "replay_state_bytes={}",
        core::mem::size_of::<Replay<WINDOW>>()
    );
    hprintln!("milli_instructions_per_tick={}", milli);
    hprintln!(
        "update_mean_milli_instructions={}",
        per_item(steady, overhead, N)
    );
    hprintln!(
        "update_fresh_mean_milli_instructions={}",
        per_item(batch, overhead, N)
    );
    hprintln!("update_max_ticks={}", max_ticks.saturating_sub(empty_max));
    hprintln!(
        "update_max_instructions_upper={}",
        ticks_to_milli_instructions(u64::from(max_ticks.saturating_sub(empty_max) + 1)) / 1000
    );
    hprintln!(
        "replay_step_mean_milli_instructions={}",
        per_item(replay_ticks, overhead, N)
    );
    hprintln!(
        "encode_decision_mean_milli_instructions={}",
        per_item(encode_ticks, overhead, N)
    );
    true
}
