//! Why the controller chose a power, or why it ignored a reading.

use core::fmt;

/// The reason attached to every [`crate::control::Decision`].
///
/// When a reading was ignored the reason says why (the `Ignored*` variants);
/// otherwise it says what the power did. [`Reason::as_str`] gives a stable
/// name for CSV and JSON, [`Reason::code`] a stable byte for binary logs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum Reason {
    /// Not enough readings yet: the power stays at the start (or last good) level.
    WarmUp = 0,
    /// The requirement is within the deadband of the current level.
    Hold = 1,
    /// The estimate requires more power.
    Raise = 2,
    /// The estimate allows less power.
    Lower = 3,
    /// A run of losses: the power climbs by the largest allowed step.
    Climb = 4,
    /// The requirement is above the highest allowed level (radio maximum or EIRP cap).
    ClampedMax = 5,
    /// The requirement is below the lowest level of the radio.
    ClampedMin = 6,
    /// The change was limited to the largest step per update.
    RateLimited = 7,
    /// The previous reading was too long ago: the history was dropped.
    HistoryExpired = 8,
    /// A run of losses has ended: tracking resumes from the power that worked.
    Recovered = 9,
    /// The packet's outcome is unknown (a missing or unjudgeable record).
    NoInformation = 10,
    /// A reading was NaN or infinite.
    IgnoredNotFinite = 11,
    /// A reading was outside the configured plausible range.
    IgnoredImplausible = 12,
    /// The far end's receiver was saturated: its reading is clipped.
    IgnoredSaturated = 13,
    /// The reading is older than one already used.
    IgnoredStale = 14,
    /// The rate changed to a faster one (less airtime): it now needs less
    /// charge per delivered packet, or the link can no longer carry the
    /// slower one's cost advantage.
    RateFaster = 15,
    /// The rate changed to a slower, more robust one: cheaper now, or the
    /// faster one can no longer hold the target within the power limits.
    RateSlower = 16,
    /// The duty-cycle budget ruled out the rate the cost would choose: a
    /// faster one that fits the budget was chosen instead.
    DutyLimited = 17,
    /// No rate fits the duty-cycle budget: the next packet is held (not
    /// sent).
    DutyHeld = 18,
    /// The record's rate is not known (no `rate` field and no `logged_rate`
    /// setting while the table gives noise bandwidths, or an index outside
    /// the table): its readings cannot be judged.
    IgnoredRateUnknown = 19,
    /// With several rates: delivering this packet would cost more than the
    /// price of its loss, so it is sent as cheaply as the plan allows and
    /// more likely lost than not (the target holds on average; see
    /// `outage_ceiling`).
    PricedOut = 20,
}

impl Reason {
    /// Number of reasons (length of arrays indexed by [`Reason::index`]).
    pub const COUNT: usize = 21;

    /// Every reason, in code order.
    pub const ALL: [Reason; Reason::COUNT] = [
        Reason::WarmUp,
        Reason::Hold,
        Reason::Raise,
        Reason::Lower,
        Reason::Climb,
        Reason::ClampedMax,
        Reason::ClampedMin,
        Reason::RateLimited,
        Reason::HistoryExpired,
        Reason::Recovered,
        Reason::NoInformation,
        Reason::IgnoredNotFinite,
        Reason::IgnoredImplausible,
        Reason::IgnoredSaturated,
        Reason::IgnoredStale,
        Reason::RateFaster,
        Reason::RateSlower,
        Reason::DutyLimited,
        Reason::DutyHeld,
        Reason::IgnoredRateUnknown,
        Reason::PricedOut,
    ];

    /// Stable lower-case name for logs, CSV and JSON.
    pub const fn as_str(self) -> &'static str {
        match self {
            Reason::WarmUp => "warm_up",
            Reason::Hold => "hold",
            Reason::Raise => "raise",
            Reason::Lower => "lower",
            Reason::Climb => "climb",
            Reason::ClampedMax => "clamped_max",
            Reason::ClampedMin => "clamped_min",
            Reason::RateLimited => "rate_limited",
            Reason::HistoryExpired => "history_expired",
            Reason::Recovered => "recovered",
            Reason::NoInformation => "no_information",
            Reason::IgnoredNotFinite => "ignored_not_finite",
            Reason::IgnoredImplausible => "ignored_implausible",
            Reason::IgnoredSaturated => "ignored_saturated",
            Reason::IgnoredStale => "ignored_stale",
            Reason::RateFaster => "rate_faster",
            Reason::RateSlower => "rate_slower",
            Reason::DutyLimited => "duty_limited",
            Reason::DutyHeld => "duty_held",
            Reason::IgnoredRateUnknown => "ignored_rate_unknown",
            Reason::PricedOut => "priced_out",
        }
    }

    /// Stable one-byte code (for binary decision logs).
    pub const fn code(self) -> u8 {
        self as u8
    }

    /// Position in arrays of length [`Reason::COUNT`].
    pub const fn index(self) -> usize {
        self as usize
    }

    /// The reason with this code, if any.
    pub fn from_code(code: u8) -> Option<Reason> {
        Reason::ALL.get(usize::from(code)).copied()
    }

    /// The reason with this name, if any (inverse of [`Reason::as_str`]).
    pub fn from_name(name: &str) -> Option<Reason> {
        Reason::ALL.iter().copied().find(|r| r.as_str() == name)
    }

    /// `true` for the reasons that say the rate changed.
    pub const fn is_rate_change(self) -> bool {
        matches!(
            self,
            Reason::RateFaster | Reason::RateSlower | Reason::DutyLimited
        )
    }

    /// `true` for the reasons that say a reading was not used.
    pub const fn is_ignored_reading(self) -> bool {
        matches!(
            self,
            Reason::IgnoredNotFinite
                | Reason::IgnoredImplausible
                | Reason::IgnoredSaturated
                | Reason::IgnoredStale
                | Reason::IgnoredRateUnknown
        )
    }
}

impl fmt::Display for Reason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

#[cfg(test)]
#[allow(clippy::panic, clippy::cast_possible_truncation)]
mod tests {
    use super::*;

    #[test]
    fn codes_names_and_indices_agree() {
        for (i, r) in Reason::ALL.iter().enumerate() {
            assert_eq!(r.index(), i);
            assert_eq!(Reason::from_code(r.code()), Some(*r));
            assert_eq!(Reason::from_name(r.as_str()), Some(*r));
        }
        assert_eq!(Reason::from_code(Reason::COUNT as u8), None);
        assert_eq!(Reason::from_name("nonsense"), None);
    }
}
