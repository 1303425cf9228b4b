//! Series of spectra: tracks and trends on synthetic series with known
//! truth (analytical ZARC and Voigt impedances, `taumap::synth`).

use taumap::io::Spectrum;
use taumap::series::{
    K_B_EV_PER_K, LambdaPolicy, SeriesParams, SeriesResult, TemperatureUnit, track_series,
};
use taumap::synth::{Element, Series, add_noise, log_frequencies};

fn frequencies() -> Vec<f64> {
    log_frequencies(1e-2, 1e6, 10.0)
}

fn spectrum(cell: &Series, noise_rel: f64, seed: u64) -> Spectrum {
    let f = frequencies();
    let (mut re, mut im) = cell.sample(&f);
    if noise_rel > 0.0 {
        add_noise(&mut re, &mut im, noise_rel, seed);
    }
    Spectrum::new(f, re, im).unwrap()
}

/// Persistent tracks of a run, by id.
fn persistent(run: &SeriesResult) -> Vec<u32> {
    run.trends.iter().map(|t| t.track).collect()
}

/// Every linked point, for failure messages.
fn describe(run: &SeriesResult) -> String {
    run.tracks
        .points
        .iter()
        .map(|p| {
            format!(
                "{}:t{}{} tau {:.3e} median {:.3e} r {:.3}",
                p.spectrum,
                p.track,
                if p.persistent { "" } else { "(short)" },
                p.tau_s,
                p.tau_median_s,
                p.r_ohm
            )
        })
        .collect::<Vec<_>>()
        .join("\n")
}

/// The points of track `id`: (spectrum, tau_s, r_ohm).
fn track(run: &SeriesResult, id: u32) -> Vec<(usize, f64, f64)> {
    run.tracks
        .points
        .iter()
        .filter(|p| p.track == id)
        .map(|p| (p.spectrum, p.tau_s, p.r_ohm))
        .collect()
}

/// Twelve spectra, labels 0, 10, ..., 110 (cycles): a fast process fixed
/// at 1e-4 s and 5 ohm; a slow one whose tau doubles (1e-2 to 2e-2 s,
/// log-linear in the label) and whose R grows 30 % (10 to 13 ohm, linear).
fn ageing(shape: fn(f64, f64) -> Element, noise_rel: f64) -> (Vec<Spectrum>, Vec<f64>) {
    let labels: Vec<f64> = (0..12).map(|k| 10.0 * k as f64).collect();
    let spectra = labels
        .iter()
        .enumerate()
        .map(|(k, l)| {
            let x = l / 110.0;
            let cell = Series(vec![
                Element::Resistor { r_ohm: 0.5 },
                shape(5.0, 1e-4),
                shape(10.0 * (1.0 + 0.3 * x), 1e-2 * 2f64.powf(x)),
            ]);
            spectrum(&cell, noise_rel, 100 + k as u64)
        })
        .collect();
    (spectra, labels)
}

fn zarc(r_ohm: f64, tau_s: f64) -> Element {
    Element::Zarc {
        r_ohm,
        tau_s,
        phi: 0.9,
    }
}

fn voigt(r_ohm: f64, tau_s: f64) -> Element {
    Element::Voigt { r_ohm, tau_s }
}

/// Exactly two tracks; the slopes of log10 tau and of R against the label
/// within 5 % of the truth (log10(2)/110 per cycle and 3/110 ohm per
/// cycle), the fixed process's slopes within 5 % of the moving one's.
fn check_ageing(shape: fn(f64, f64) -> Element, noise_rel: f64) {
    let (spectra, labels) = ageing(shape, noise_rel);
    let run = track_series(&spectra, &labels, &SeriesParams::default()).unwrap();
    assert_eq!(
        persistent(&run),
        vec![1, 2],
        "noise {noise_rel}\n{}",
        describe(&run)
    );
    let (fast, slow) = (&run.trends[0], &run.trends[1]);
    assert_eq!((fast.points, slow.points), (12, 12));
    let tau_slope = 2f64.log10() / 110.0;
    let r_slope = 3.0 / 110.0;
    let ts = slow.log10_tau_line.unwrap().slope;
    let rsl = slow.r_line.unwrap().slope;
    assert!(
        (ts / tau_slope - 1.0).abs() < 0.05,
        "noise {noise_rel}: log10 tau slope {ts:e} vs {tau_slope:e}"
    );
    assert!(
        (rsl / r_slope - 1.0).abs() < 0.05,
        "noise {noise_rel}: R slope {rsl:e} vs {r_slope:e}"
    );
    assert!(fast.log10_tau_line.unwrap().slope.abs() < 0.05 * tau_slope * 2.0);
    assert!(fast.r_line.unwrap().slope.abs() < 0.05 * r_slope * 2.0);
    // First and last values within 5 % of the truth.
    assert!(
        (slow.tau_first_s / 1e-2 - 1.0).abs() < 0.05,
        "{}",
        slow.tau_first_s
    );
    assert!(
        (slow.tau_last_s / 2e-2 - 1.0).abs() < 0.05,
        "{}",
        slow.tau_last_s
    );
    assert!(
        (slow.r_first_ohm / 10.0 - 1.0).abs() < 0.05,
        "{}",
        slow.r_first_ohm
    );
    assert!(
        (slow.r_last_ohm / 13.0 - 1.0).abs() < 0.05,
        "{}",
        slow.r_last_ohm
    );
}

#[test]
fn a_doubling_tau_and_a_growing_r_are_followed_at_low_noise() {
    check_ageing(zarc, 1e-3);
    check_ageing(voigt, 1e-3);
}

#[test]
fn a_doubling_tau_and_a_growing_r_are_followed_at_one_percent_noise() {
    check_ageing(zarc, 1e-2);
    check_ageing(voigt, 1e-2);
}

#[test]
fn a_process_that_appears_halfway_starts_a_new_track_there() {
    // Spectra 0-11; a third process (a surface film, 3 ohm at 1 s) from
    // spectrum 6 on.
    let spectra: Vec<Spectrum> = (0..12)
        .map(|k| {
            let mut e = vec![
                Element::Resistor { r_ohm: 0.5 },
                zarc(5.0, 1e-4),
                zarc(10.0, 1e-2),
            ];
            if k >= 6 {
                e.push(Element::Voigt {
                    r_ohm: 3.0,
                    tau_s: 1.0,
                });
            }
            spectrum(&Series(e), 1e-3, 200 + k)
        })
        .collect();
    let run = track_series(&spectra, &[], &SeriesParams::default()).unwrap();
    assert_eq!(persistent(&run), vec![1, 2, 3], "{}", describe(&run));
    let film = track(&run, 3);
    assert_eq!(film.len(), 6);
    assert_eq!(film[0].0, 6, "the film's track starts at spectrum 6");
    for (_, tau, r) in &film {
        assert!((tau.log10()).abs() < 0.05, "{tau}");
        assert!((r / 3.0 - 1.0).abs() < 0.03, "{r}");
    }
    // Without labels, the trend axis is the position.
    assert_eq!(run.trends[2].first_x, 6.0);
}

#[test]
fn a_process_missing_from_one_spectrum_keeps_its_id() {
    // The slow process is absent from spectrum 5 (below detection).
    let spectra: Vec<Spectrum> = (0..10)
        .map(|k| {
            let mut e = vec![Element::Resistor { r_ohm: 0.5 }, zarc(5.0, 1e-4)];
            if k != 5 {
                e.push(zarc(10.0, 1e-2));
            }
            spectrum(&Series(e), 1e-3, 300 + k)
        })
        .collect();
    let run = track_series(&spectra, &[], &SeriesParams::default()).unwrap();
    assert_eq!(persistent(&run), vec![1, 2]);
    let slow: Vec<usize> = track(&run, 2).iter().map(|p| p.0).collect();
    assert_eq!(slow, [0, 1, 2, 3, 4, 6, 7, 8, 9]);
}

/// Two processes with activation energies 0.6 eV and 1.1 eV in tau and R
/// (tau = tau_0 exp(E_a/(k_B T)), R likewise) at six temperatures from
/// 550 to 800 degC: both energies within 0.03 eV. k_B from CODATA 2018.
#[test]
fn arrhenius_series_returns_both_activation_energies() {
    let t_c: Vec<f64> = (0..6).map(|i| 550.0 + 50.0 * i as f64).collect();
    let act = |e_ev: f64, at_700c: f64, t_k: f64| {
        at_700c * (e_ev / K_B_EV_PER_K * (1.0 / t_k - 1.0 / 973.15)).exp()
    };
    for noise_rel in [1e-3, 5e-3] {
        let spectra: Vec<Spectrum> = t_c
            .iter()
            .enumerate()
            .map(|(i, c)| {
                let t_k = c + 273.15;
                let cell = Series(vec![
                    Element::Resistor { r_ohm: 0.3 },
                    // Electrolyte-like fast process, 0.6 eV.
                    zarc(act(0.6, 2.0, t_k), act(0.6, 1e-5, t_k)),
                    // Electrode process, 1.1 eV.
                    zarc(act(1.1, 5.0, t_k), act(1.1, 1e-2, t_k)),
                ]);
                spectrum(&cell, noise_rel, 400 + i as u64)
            })
            .collect();
        let params = SeriesParams {
            temperature: Some(TemperatureUnit::Celsius),
            ..SeriesParams::default()
        };
        let run = track_series(&spectra, &t_c, &params).unwrap();
        assert_eq!(persistent(&run), vec![1, 2], "noise {noise_rel}");
        for (trend, ea) in run.trends.iter().zip([0.6, 1.1]) {
            let tau = trend.ea_tau.unwrap();
            let r = trend.ea_r.unwrap();
            assert!(
                (tau.ea_ev - ea).abs() < 0.03,
                "tau: {} vs {ea}\n{}",
                tau.ea_ev,
                describe(&run)
            );
            assert!((r.ea_ev - ea).abs() < 0.03, "R: {} vs {ea}", r.ea_ev);
            assert!(tau.ea_se_ev.unwrap() < 0.03);
        }
    }
}

#[test]
fn both_lambda_policies_run_and_the_series_one_uses_one_lambda() {
    let (spectra, labels) = ageing(zarc, 1e-3);
    let each = SeriesParams {
        lambda_policy: LambdaPolicy::Each,
        ..SeriesParams::default()
    };
    let a = track_series(&spectra, &labels, &each).unwrap();
    let b = track_series(&spectra, &labels, &SeriesParams::default()).unwrap();
    assert!(a.lambda.is_none());
    let l = b.lambda.unwrap();
    for inv in &b.inversions {
        assert_eq!(inv.as_ref().unwrap().drt.lambda.lambda, l);
    }
    let distinct: std::collections::BTreeSet<u64> = a
        .inversions
        .iter()
        .map(|i| i.as_ref().unwrap().drt.lambda.lambda.to_bits())
        .collect();
    assert!(distinct.len() > 1, "the rule chose per spectrum");
}

/// Folding: in every spectrum the persistent tracks' resistances add up to
/// the areas of all its peaks, and a short-lived peak (here a ripple in the
/// valley between two ZARCs at low noise) gives its area to a neighbour.
#[test]
fn short_lived_peaks_are_folded_into_their_neighbours() {
    let (spectra, labels) = ageing(zarc, 1e-3);
    let run = track_series(&spectra, &labels, &SeriesParams::default()).unwrap();
    let short = run.tracks.points.iter().filter(|p| !p.persistent).count();
    assert!(
        short > 0,
        "the series has a ripple to fold\n{}",
        describe(&run)
    );
    for k in 0..spectra.len() {
        let pts: Vec<_> = run
            .tracks
            .points
            .iter()
            .filter(|p| p.spectrum == k)
            .collect();
        let all: f64 = pts.iter().map(|p| p.r_peak_ohm).sum();
        let kept: f64 = pts.iter().filter(|p| p.persistent).map(|p| p.r_ohm).sum();
        assert!(
            (all - kept).abs() < 1e-9 * all,
            "spectrum {k}: {all} vs {kept}"
        );
        for p in pts.iter().filter(|p| p.persistent) {
            assert!(p.r_ohm >= p.r_peak_ohm);
        }
    }
}
