//! Linking the peaks of neighbouring spectra into tracks.
//!
//! A track is one process followed through a series: its peak in every
//! spectrum where it is seen. Peaks arrive one spectrum at a time, in series
//! order; each spectrum's peaks are assigned to the open tracks by one
//! optimal assignment (global nearest neighbour, the standard association
//! step of multiple-target tracking: S. S. Blackman, *Multiple-Target
//! Tracking with Radar Applications*, Artech House, 1986, ch. 4), solved
//! exactly with the Hungarian method (H. W. Kuhn, Naval Res. Logist. Q. 2,
//! 83-97, 1955; J. Munkres, J. SIAM 5, 32-38, 1957; the implementation of
//! the `pathfinding` crate).
//!
//! The distance between a track's last observation and a peak is
//!
//! $$ d^2 = \left(\frac{\Delta \log_{10}\tau}{g_\tau}\right)^2
//!        + \left(\frac{\Delta \ln R}{\ln g_R}\right)^2
//!        + 0.05\,(\text{spectra missed}) $$
//!
//! with the gate half-widths `g_tau` (decades) and `g_R` (a factor). A pair
//! whose distance without the missed-spectra term exceeds 1 is outside the
//! gate and never linked. Every open track may also stay unassigned at
//! cost 1 (the gate), so a pair is linked only when its whole cost,
//! missed spectra included, is below that: the gate narrows by 0.05 (in
//! `d^2`) for each spectrum the track missed. A track
//! stays open for `max_gap` spectra without a peak (a process below
//! detection for a spectrum or two keeps its id); a peak no track takes
//! starts a new track. Ids count from 1 in order of creation (ascending tau
//! within a spectrum), so they are stable for a given series and options.
//!
//! The prediction of a track is its last observation (a random walk): the
//! gate must cover the change between neighbouring spectra, not the whole
//! drift. The small cost per missed spectrum prefers a track seen in the
//! spectrum just before over one seen earlier, all else equal.

use pathfinding::prelude::{Matrix, kuhn_munkres_min};

use crate::{Error, Result};

/// Options of the linking.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct LinkOptions {
    /// Gate half-width in log10 tau (decades) between neighbouring
    /// observations of one track.
    pub gate_decades: f64,
    /// Gate half-width of the resistance as a factor (3: from a third to
    /// three times).
    pub gate_r_factor: f64,
    /// Spectra a track may miss and keep its id.
    pub max_gap: usize,
}

impl Default for LinkOptions {
    /// A gate of one decade and a factor of 10 in R (wide enough for a
    /// temperature step of 50 K at 1.1 eV, a factor of 2.4 in both;
    /// narrow enough to keep processes a decade apart apart in the usual
    /// few-percent steps of cycling), two missed spectra.
    fn default() -> Self {
        Self {
            gate_decades: 1.0,
            gate_r_factor: 10.0,
            max_gap: 2,
        }
    }
}

impl LinkOptions {
    /// Checks every option, naming the offending one.
    pub fn validate(&self) -> Result<()> {
        if !(self.gate_decades.is_finite() && self.gate_decades > 0.0) {
            return Err(Error::Param {
                name: "gate-decades",
                expected: "a positive number of decades",
                value: self.gate_decades,
            });
        }
        if !(self.gate_r_factor.is_finite() && self.gate_r_factor > 1.0) {
            return Err(Error::Param {
                name: "gate-r-factor",
                expected: "a factor above 1",
                value: self.gate_r_factor,
            });
        }
        Ok(())
    }
}

/// Cost of one missed spectrum, in units of the squared gate.
pub const GAP_COST: f64 = 0.05;

/// A peak offered to the linker.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PeakPoint {
    /// Time constant (s).
    pub tau_s: f64,
    /// Resistance (the peak's area, ohm; siemens for an admittance
    /// distribution).
    pub r_ohm: f64,
}

#[derive(Clone, Debug)]
struct OpenTrack {
    id: u32,
    last_spectrum: usize,
    log10_tau: f64,
    ln_r: f64,
}

/// The online linker: feed each spectrum's peaks in series order.
#[derive(Clone, Debug)]
pub struct Linker {
    opts: LinkOptions,
    open: Vec<OpenTrack>,
    next_id: u32,
    last_spectrum: Option<usize>,
}

/// Integer scale of the costs for the exact integer assignment.
const COST_SCALE: f64 = 1e6;
/// Cost of a pair outside the gate (never chosen over staying unassigned).
const FORBIDDEN: i64 = 1_000_000_000_000;

impl Linker {
    /// A linker with no tracks.
    pub fn new(opts: LinkOptions) -> Result<Self> {
        opts.validate()?;
        Ok(Self {
            opts,
            open: Vec::new(),
            next_id: 1,
            last_spectrum: None,
        })
    }

    /// Number of tracks started so far.
    pub fn tracks_started(&self) -> u32 {
        self.next_id - 1
    }

    /// The squared gated distance between an open track and a peak, or
    /// `None` outside the gate.
    fn distance_sq(&self, t: &OpenTrack, p: &PeakPoint, spectrum: usize) -> Option<f64> {
        let dt = (p.tau_s.log10() - t.log10_tau) / self.opts.gate_decades;
        let dr = (p.r_ohm.ln() - t.ln_r) / self.opts.gate_r_factor.ln();
        let missed = spectrum - t.last_spectrum - 1;
        let d2 = dt * dt + dr * dr;
        (d2.is_finite() && d2 <= 1.0).then_some(d2 + GAP_COST * missed as f64)
    }

    /// Assigns the peaks of spectrum `spectrum` (positions ascending over
    /// calls; a skipped position counts as a spectrum without peaks) and
    /// returns the track id of each peak, in the order given. Peaks with a
    /// non-positive or non-finite tau or R start no track and get `None`.
    pub fn push(&mut self, spectrum: usize, peaks: &[PeakPoint]) -> Vec<Option<u32>> {
        if let Some(last) = self.last_spectrum {
            assert!(spectrum > last, "spectra must come in ascending order");
        }
        self.last_spectrum = Some(spectrum);
        let max_gap = self.opts.max_gap;
        self.open
            .retain(|t| spectrum - t.last_spectrum <= max_gap + 1);
        let usable: Vec<usize> = (0..peaks.len())
            .filter(|&i| {
                let p = &peaks[i];
                p.tau_s.is_finite() && p.tau_s > 0.0 && p.r_ohm.is_finite() && p.r_ohm > 0.0
            })
            .collect();
        let mut ids: Vec<Option<u32>> = vec![None; peaks.len()];
        let (n_t, n_p) = (self.open.len(), usable.len());
        if n_t > 0 && n_p > 0 {
            // Rows: open tracks; columns: the peaks, then one "unassigned"
            // column per track (cost of the gate for its own, forbidden for
            // the others), so every track has a column and rows <= columns.
            let mut w = vec![FORBIDDEN; n_t * (n_p + n_t)];
            for (r, t) in self.open.iter().enumerate() {
                let row = &mut w[r * (n_p + n_t)..(r + 1) * (n_p + n_t)];
                for (c, &i) in usable.iter().enumerate() {
                    if let Some(d2) = self.distance_sq(t, &peaks[i], spectrum) {
                        row[c] = (d2 * COST_SCALE).round() as i64;
                    }
                }
                row[n_p + r] = COST_SCALE as i64;
            }
            let m = Matrix::from_vec(n_t, n_p + n_t, w)
                .expect("the cost matrix has rows x columns entries");
            let (_, assignment) = kuhn_munkres_min(&m);
            for (r, &c) in assignment.iter().enumerate() {
                if c < n_p {
                    let i = usable[c];
                    let t = &mut self.open[r];
                    t.last_spectrum = spectrum;
                    t.log10_tau = peaks[i].tau_s.log10();
                    t.ln_r = peaks[i].r_ohm.ln();
                    ids[i] = Some(t.id);
                }
            }
        }
        for &i in &usable {
            if ids[i].is_none() {
                let id = self.next_id;
                self.next_id += 1;
                self.open.push(OpenTrack {
                    id,
                    last_spectrum: spectrum,
                    log10_tau: peaks[i].tau_s.log10(),
                    ln_r: peaks[i].r_ohm.ln(),
                });
                ids[i] = Some(id);
            }
        }
        ids
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p(tau_s: f64, r_ohm: f64) -> PeakPoint {
        PeakPoint { tau_s, r_ohm }
    }

    fn linker() -> Linker {
        Linker::new(LinkOptions::default()).unwrap()
    }

    #[test]
    fn drifting_processes_keep_their_ids() {
        let mut l = linker();
        for s in 0..12 {
            let k = s as f64 / 11.0;
            // One process doubles its tau, the other stays.
            let ids = l.push(
                s,
                &[p(1e-4, 5.0), p(1e-2 * 2f64.powf(k), 10.0 * (1.0 + 0.3 * k))],
            );
            assert_eq!(ids, vec![Some(1), Some(2)], "spectrum {s}");
        }
        assert_eq!(l.tracks_started(), 2);
    }

    #[test]
    fn a_gap_of_one_or_two_spectra_keeps_the_id_three_do_not() {
        let mut l = linker();
        l.push(0, &[p(1e-3, 1.0), p(1e-1, 2.0)]);
        l.push(1, &[p(1e-3, 1.0)]);
        l.push(2, &[p(1e-3, 1.0)]);
        assert_eq!(
            l.push(3, &[p(1e-3, 1.0), p(1e-1, 2.0)]),
            vec![Some(1), Some(2)]
        );
        for s in 4..7 {
            l.push(s, &[p(1e-3, 1.0)]);
        }
        // Missed 4, 5 and 6: a new track.
        assert_eq!(
            l.push(7, &[p(1e-3, 1.0), p(1e-1, 2.0)]),
            vec![Some(1), Some(3)]
        );
    }

    #[test]
    fn a_new_process_starts_a_new_track_and_a_far_jump_is_not_linked() {
        let mut l = linker();
        l.push(0, &[p(1e-2, 1.0)]);
        // A peak two decades away is another process, even alone.
        assert_eq!(l.push(1, &[p(1.0, 1.0)]), vec![Some(2)]);
        // A tenfold R change at the same tau is outside a factor-10 gate
        // once combined with any tau change.
        assert_eq!(l.push(2, &[p(1.2, 12.0)]), vec![Some(3)]);
    }

    #[test]
    fn the_assignment_is_global_not_greedy() {
        // Track A at 1e-3 and B at 3e-3; the new peaks at 2e-3 and 6e-3.
        // Greedy nearest-first would give 2e-3 to B (0.18 decade) and
        // leave A to 6e-3 (0.78); the optimum gives A 2e-3 (0.30) and B
        // 6e-3 (0.30).
        let mut l = linker();
        l.push(0, &[p(1e-3, 1.0), p(3e-3, 1.0)]);
        assert_eq!(
            l.push(1, &[p(2e-3, 1.0), p(6e-3, 1.0)]),
            vec![Some(1), Some(2)]
        );
    }

    #[test]
    fn unusable_peaks_start_nothing() {
        let mut l = linker();
        assert_eq!(
            l.push(0, &[p(f64::NAN, 1.0), p(1e-3, 0.0), p(1e-3, 1.0)]),
            vec![None, None, Some(1)]
        );
        assert_eq!(l.tracks_started(), 1);
    }

    #[test]
    fn options_are_checked() {
        assert!(
            Linker::new(LinkOptions {
                gate_decades: 0.0,
                ..LinkOptions::default()
            })
            .is_err()
        );
        assert!(
            Linker::new(LinkOptions {
                gate_r_factor: 1.0,
                ..LinkOptions::default()
            })
            .is_err()
        );
    }
}
