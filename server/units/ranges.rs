//! The plausible range of each quantity, in its canonical unit, each bound with its reason.
//!
//! The bounds are there to catch typing slips (a missing exponent digit, a value in the wrong
//! unit, a linear value typed as a log10) and leave a margin around the values measured so
//! far; they do not mark physical limits.

/// Smallest accepted black-hole mass, log10(M_BH / M☉).
///
/// The lightest dynamically measured nuclear black holes are around 10^4–10^5 M☉ (from
/// memory); the range reaches a further dex down so that intermediate-mass candidates can be
/// entered.
pub const LOG_MBH_MIN: f64 = 3.0;

/// Largest accepted black-hole mass, log10(M_BH / M☉).
///
/// The heaviest measured black holes are around 10^10.5 M☉ (from memory); one dex of margin
/// leaves room for the heaviest candidates without admitting typing slips such as a missing
/// exponent digit.
pub const LOG_MBH_MAX: f64 = 11.5;

/// Smallest accepted velocity dispersion, km/s: the nuclei of dwarf galaxies, around
/// 20–30 km/s (from memory).
pub const SIGMA_MIN_KM_S: f64 = 20.0;

/// Largest accepted velocity dispersion, km/s: the brightest cluster galaxies reach about
/// 400–450 km/s (from memory); 600 km/s leaves margin without admitting a slip by a factor of
/// ten.
pub const SIGMA_MAX_KM_S: f64 = 600.0;

/// Smallest accepted bulge mass, log10(M_bulge / M☉): below the smallest bulges and nuclear
/// star clusters with measured black holes (around 10^7–10^8 M☉, from memory) by a wide margin.
pub const LOG_MBULGE_MIN: f64 = 6.0;

/// Largest accepted bulge mass, log10(M_bulge / M☉): the most massive spheroids are around
/// 10^12.5 M☉ (from memory); one dex of margin.
pub const LOG_MBULGE_MAX: f64 = 13.5;

/// Smallest accepted bulge luminosity, log10(L / L☉), in any band: the same reasoning as
/// [`LOG_MBULGE_MIN`] with mass-to-light ratios of order one.
pub const LOG_LBULGE_MIN: f64 = 6.0;

/// Largest accepted bulge luminosity, log10(L / L☉): the same reasoning as
/// [`LOG_MBULGE_MAX`].
pub const LOG_LBULGE_MAX: f64 = 13.5;

/// Smallest accepted distance, Mpc: 5 kpc, so that the centre of our own Galaxy (about 8 kpc
/// away, from memory) can be entered; everything else lies at 0.7 Mpc or more.
pub const DISTANCE_MIN_MPC: f64 = 0.005;

/// Largest accepted distance, Mpc: about redshift 0.4. The bound is there to catch typing
/// slips (a distance typed in kpc, a misplaced decimal point), not to mark a physical limit.
/// As an order-of-magnitude argument, dynamical black-hole masses have been measured out to a
/// few hundred Mpc (from memory), so a distance ten times larger lies far outside where
/// spheres of influence are resolved today.
pub const DISTANCE_MAX_MPC: f64 = 2000.0;

/// Smallest accepted spatial resolution, arcsec: 10 µas, the scale of event-horizon VLBI
/// (about 20 µas, from memory); water-maser disks are mapped at about 10⁻⁴–10⁻³ arcsec
/// (from memory).
pub const RESOLUTION_MIN_ARCSEC: f64 = 1e-5;

/// Largest accepted spatial resolution, arcsec: seeing-limited long-slit spectra are about
/// 1 arcsec. The bound is there to catch typing slips (a resolution typed in milliarcseconds,
/// a misplaced decimal point), not to mark a physical limit. As an order-of-magnitude
/// argument, spheres of influence beyond our own Galaxy subtend at most a few arcseconds (from
/// memory) and are resolved today at about 1 arcsec or finer, so a resolution coarser than
/// 10 arcsec lies far outside that.
pub const RESOLUTION_MAX_ARCSEC: f64 = 10.0;

/// Largest accepted error, dex: an error of more than two dex (a factor of 100 either way)
/// says nothing about the value, and such a number is far more often a slip (a linear error
/// typed on the log scale) than a measurement; common practice.
pub const MAX_ERR_DEX: f64 = 2.0;

/// Longest accepted entry, in characters (after trimming). Real entries are under 40.
pub const MAX_ENTRY_CHARS: usize = 120;

/// Tolerance, in dex, when comparing a log value with the ends of its range: only absorbs
/// rounding, so that `600` km/s typed as `6x10^2` is not refused by one unit in the last place.
pub(super) const RANGE_EPS_DEX: f64 = 1e-9;

#[cfg(test)]
mod tests {
    use super::super::grammar::tests::accept;
    use super::super::{EntryError, Quantity, Scale, parse_entry, parse_linear};

    #[test]
    fn range_ends_are_accepted_and_just_beyond_refused() {
        // The ends are the project's plausibility bounds above, each documented with its reason.
        use Quantity as Q;
        let inside: &[(&str, Quantity, Scale)] = &[
            ("log 3", Q::BlackHoleMass, Scale::Auto),
            ("1e3", Q::BlackHoleMass, Scale::Auto),
            ("log 11.5", Q::BlackHoleMass, Scale::Auto),
            ("20", Q::VelocityDispersion, Scale::Auto),
            ("600", Q::VelocityDispersion, Scale::Auto),
            ("6x10^2", Q::VelocityDispersion, Scale::Auto),
            ("log 6", Q::BulgeMass, Scale::Auto),
            ("log 13.5", Q::BulgeMass, Scale::Auto),
            ("1e6", Q::BulgeLuminosity, Scale::Auto),
            ("log 13.5", Q::BulgeLuminosity, Scale::Auto),
            ("0.005", Q::Distance, Scale::Auto),
            ("2000", Q::Distance, Scale::Auto),
            ("0.00001", Q::Resolution, Scale::Auto),
            ("10", Q::Resolution, Scale::Auto),
        ];
        for &(text, quantity, scale) in inside {
            accept(text, quantity, scale);
        }
        let outside: &[(&str, Quantity, Scale)] = &[
            ("log 2.99", Q::BlackHoleMass, Scale::Auto),
            ("9.9e2", Q::BlackHoleMass, Scale::Auto),
            ("log 11.51", Q::BlackHoleMass, Scale::Auto),
            ("19.9", Q::VelocityDispersion, Scale::Linear),
            ("600.1", Q::VelocityDispersion, Scale::Auto),
            ("log 5.99", Q::BulgeMass, Scale::Auto),
            ("log 13.51", Q::BulgeMass, Scale::Auto),
            ("9e5", Q::BulgeLuminosity, Scale::Auto),
            ("log 13.51", Q::BulgeLuminosity, Scale::Auto),
            ("0.0049", Q::Distance, Scale::Auto),
            ("2000.1", Q::Distance, Scale::Auto),
            ("0.0000099", Q::Resolution, Scale::Auto),
            ("10.01", Q::Resolution, Scale::Auto),
        ];
        for &(text, quantity, scale) in outside {
            let result = parse_entry(text, quantity, scale);
            assert!(
                matches!(result, Err(EntryError::OutOfRange { .. })),
                "`{text}` ({quantity}): {result:?}"
            );
        }
        // The same ends through the linear reader.
        for (text, quantity, ok) in [
            ("0.005", Q::Distance, true),
            ("2000", Q::Distance, true),
            ("0.004", Q::Distance, false),
            ("1e-5", Q::Resolution, true),
            ("10", Q::Resolution, true),
            ("11", Q::Resolution, false),
        ] {
            assert_eq!(
                parse_linear(text, quantity).is_ok(),
                ok,
                "{text} ({quantity})"
            );
        }
    }
}
