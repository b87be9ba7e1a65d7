//! Clipping onset and knee of a level sweep, from its steps alone (pure arithmetic).

use super::report::{Knee, Onset, SweepStep, KNEE_SLOPE};

/// THD below this (%) is taken as the measurement's floor, not the stage's: a segment must end
/// above it to count for the knee (−80 dB; common practice for a clean line stage's floor).
pub const KNEE_FLOOR_PCT: f64 = 0.01;

fn thd_db(pct: f64) -> f64 {
    20.0 * (pct / 100.0).log10()
}

/// Linear interpolation of `a` → `b` at fraction `t`, when both ends are known.
fn lerp(a: Option<f64>, b: Option<f64>, t: f64) -> Option<f64> {
    Some(a? + (b? - a?) * t)
}

/// The steps with a distortion reading above zero, each with that reading (%).
fn measured(steps: &[SweepStep]) -> Vec<(&SweepStep, f64)> {
    steps
        .iter()
        .filter_map(|s| s.figure_pct().filter(|t| *t > 0.0).map(|t| (s, t)))
        .collect()
}

/// The drive at which THD first crosses `threshold_pct` going up, interpolated between the two
/// steps around the crossing on a dB scale (THD in dB against drive in dBFS). `None` when THD
/// never crosses it, or is already above it at the first step (the onset lies below the sweep).
/// Steps must be in rising drive; steps with no THD reading are skipped.
pub fn onset(steps: &[SweepStep], threshold_pct: f64) -> Option<Onset> {
    if threshold_pct.is_nan() || threshold_pct <= 0.0 {
        return None;
    }
    let measured = measured(steps);
    if measured.first().is_some_and(|&(_, t)| t >= threshold_pct) {
        return None;
    }
    measured.windows(2).find_map(|w| {
        let ((a, ta), (b, tb)) = (w[0], w[1]);
        if ta >= threshold_pct || tb < threshold_pct {
            return None;
        }
        let (da, db, dt) = (thd_db(ta), thd_db(tb), thd_db(threshold_pct));
        let t = if db > da { (dt - da) / (db - da) } else { 1.0 };
        Some(Onset {
            thd_pct: threshold_pct,
            drive_dbfs: a.drive_dbfs + (b.drive_dbfs - a.drive_dbfs) * t,
            return_dbfs: lerp(a.return_dbfs, b.return_dbfs, t),
        })
    })
}

/// The drives of the two steps around the first upward crossing of `threshold_pct` (as
/// [`onset`] finds it), when they differ.
pub fn bracket(steps: &[SweepStep], threshold_pct: f64) -> Option<(f64, f64)> {
    let o = onset(steps, threshold_pct)?;
    let below = steps
        .iter()
        .filter(|s| {
            s.drive_dbfs <= o.drive_dbfs && s.figure_pct().is_some_and(|t| t < threshold_pct)
        })
        .map(|s| s.drive_dbfs)
        .fold(f64::MIN, f64::max);
    let above = steps
        .iter()
        .filter(|s| {
            s.drive_dbfs >= o.drive_dbfs && s.figure_pct().is_some_and(|t| t >= threshold_pct)
        })
        .map(|s| s.drive_dbfs)
        .fold(f64::MAX, f64::min);
    (below > f64::MIN && above < f64::MAX && above - below > 1e-9).then_some((below, above))
}

/// The knee: the lower step of the first segment over which THD rises faster than
/// [`KNEE_SLOPE`] dB per dB of drive and ends above [`KNEE_FLOOR_PCT`]; with the steepest such
/// rise anywhere in the sweep. `None` when no segment rises that fast.
pub fn knee(steps: &[SweepStep]) -> Option<Knee> {
    let measured = measured(steps);
    let slopes: Vec<(usize, f64)> = measured
        .windows(2)
        .enumerate()
        .filter_map(|(i, w)| {
            let ((a, ta), (b, tb)) = (w[0], w[1]);
            let dd = b.drive_dbfs - a.drive_dbfs;
            (dd > 0.0 && tb > KNEE_FLOOR_PCT).then(|| (i, (thd_db(tb) - thd_db(ta)) / dd))
        })
        .collect();
    let first = slopes.iter().find(|&&(_, s)| s > KNEE_SLOPE)?.0;
    let steepest = slopes.iter().map(|&(_, s)| s).fold(f64::MIN, f64::max);
    let (step, thd) = measured[first];
    Some(Knee {
        drive_dbfs: step.drive_dbfs,
        return_dbfs: step.return_dbfs,
        thd_pct: Some(thd),
        steepest_db_per_db: steepest,
    })
}

/// Loop gain (dB): return minus drive at the lowest step that returned a tone.
pub fn loop_gain(steps: &[SweepStep]) -> Option<f64> {
    steps
        .iter()
        .filter(|s| s.return_dbfs.is_some())
        .min_by(|a, b| a.drive_dbfs.total_cmp(&b.drive_dbfs))
        .and_then(|s| Some(s.return_dbfs? - s.drive_dbfs))
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;

    use super::*;

    fn step(drive: f64, thd: Option<f64>) -> SweepStep {
        SweepStep {
            drive_dbfs: drive,
            frequency_hz: 997.0,
            return_dbfs: Some(drive - 1.0),
            return_hz: Some(997.0),
            return_peak_dbfs: Some(drive - 1.0),
            thd_pct: thd,
            thd_n_db: None,
            odd_even_db: None,
            falloff_db_per_octave: None,
            harmonics_dbc: BTreeMap::new(),
            imd_pct: None,
            imd_db: None,
            refined: false,
        }
    }

    #[test]
    fn onset_interpolates_on_a_db_scale() {
        // THD 0.1 % at −20, 10 % at −10 dBFS: on a dB scale (−60 → −20 dB) the 1 % point
        // (−40 dB) lies half way, at −15 dBFS; the return follows at −16.
        let steps = [
            step(-30.0, Some(0.05)),
            step(-20.0, Some(0.1)),
            step(-10.0, Some(10.0)),
        ];
        let o = onset(&steps, 1.0).expect("crosses");
        assert!((o.drive_dbfs + 15.0).abs() < 1e-9, "{o:?}");
        assert!((o.return_dbfs.expect("return") + 16.0).abs() < 1e-9);
        assert_eq!(o.thd_pct, 1.0);
    }

    #[test]
    fn onset_is_none_when_never_crossed_or_already_above() {
        let low = [step(-30.0, Some(0.05)), step(-20.0, Some(0.5))];
        assert_eq!(onset(&low, 1.0), None);
        let high = [step(-30.0, Some(2.0)), step(-20.0, Some(5.0))];
        assert_eq!(onset(&high, 1.0), None);
        assert_eq!(onset(&[], 1.0), None);
        assert_eq!(onset(&low, 0.0), None);
    }

    #[test]
    fn onset_skips_steps_without_a_reading() {
        let steps = [
            step(-30.0, Some(0.1)),
            step(-25.0, None),
            step(-20.0, Some(10.0)),
        ];
        let o = onset(&steps, 1.0).expect("crosses");
        assert!((o.drive_dbfs + 25.0).abs() < 1e-9, "{o:?}");
    }

    #[test]
    fn bracket_names_the_steps_around_the_crossing() {
        let steps = [
            step(-30.0, Some(0.05)),
            step(-20.0, Some(0.1)),
            step(-10.0, Some(10.0)),
        ];
        assert_eq!(bracket(&steps, 1.0), Some((-20.0, -10.0)));
        assert_eq!(bracket(&steps, 50.0), None);
    }

    #[test]
    fn knee_finds_the_first_fast_rise() {
        // Slopes: +6 dB of THD over 2 dB of drive is 3 dB/dB, not above the knee slope; then
        // about 0; then 0.2 → 2 % (+20 dB) over 2 dB is 10 dB/dB: the knee is the step at −26.
        let steps = [
            step(-30.0, Some(0.1)),
            step(-28.0, Some(0.1 * 10f64.powf(6.0 / 20.0))),
            step(-26.0, Some(0.2)),
            step(-24.0, Some(2.0)),
            step(-22.0, Some(3.0)),
        ];
        let k = knee(&steps).expect("knee");
        assert_eq!(k.drive_dbfs, -26.0);
        assert!((k.steepest_db_per_db - 10.0).abs() < 1e-9, "{k:?}");
    }

    #[test]
    fn knee_ignores_rises_within_the_floor_and_gentle_curves() {
        // A second-order stage: THD rises 1 dB per dB throughout.
        let gentle: Vec<SweepStep> = (0..10)
            .map(|i| {
                let d = -40.0 + 2.0 * f64::from(i);
                step(d, Some(10f64.powf((d + 20.0) / 20.0)))
            })
            .collect();
        assert_eq!(knee(&gentle), None);
        // Noise wobbling under the floor.
        let floor = [step(-30.0, Some(0.0001)), step(-29.0, Some(0.005))];
        assert_eq!(knee(&floor), None);
    }

    #[test]
    fn loop_gain_uses_the_lowest_returned_step() {
        let mut a = step(-20.0, None);
        a.return_dbfs = Some(-26.0);
        let mut b = step(-30.0, None);
        b.return_dbfs = None;
        let mut c = step(-25.0, None);
        c.return_dbfs = Some(-31.5);
        assert_eq!(loop_gain(&[a, b, c]), Some(-6.5));
        assert_eq!(loop_gain(&[]), None);
    }
}
