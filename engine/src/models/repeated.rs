//! Repeated-measures and mixed (split-plot) analysis of variance, univariate approach, with
//! sphericity tests and corrections.
//!
//! Method. N complete subjects, each in one between cell g(s) of the between factors (G cells,
//! possibly unequal in size) and measured once in each of the C within cells (the product of
//! the within factors' levels): the N × C matrix Y. For a within effect E (a set of within
//! factors, the empty set being the between-subjects stratum) the transformed scores are
//!
//! ```text
//! Z_E = Y · M_E,   M_E = ⊗_f (H_f if f ∈ E else 1_{k_f}/√k_f)                       (1)
//! ```
//!
//! with H_f the orthonormal Helmert contrasts of within factor f, so Z_E has d_E = Π_{f∈E}(k_f − 1)
//! columns (one, the scaled subject total, for the between stratum). Each stratum is a
//! between-subjects factorial model on Z_E ([`super::linear`]): for a between term G the
//! hypothesis SSCP H_{E,G} (type 2 or 3) and the error SSCP R_E pooled within between cells:
//!
//! ```text
//! SS(G × E) = tr H_{E,G},  df = d_E · df_G;   SS_error(E) = tr R_E,  df_error = d_E · ν,
//! ν = N − G;   F = (SS/df) / (SS_error/df_error)                                     (2)
//! ```
//!
//! Sphericity of stratum E (d_E ≥ 2), with S = R_E / ν:
//!
//! ```text
//! ε_GG = tr(S)² / (d · tr(S²))                       Greenhouse & Geisser (1959)          (3)
//! ε_HF = ((ν + 1)·d·ε_GG − 2) / (d·(ν − d·ε_GG))     Huynh & Feldt (1976) with Lecoutre's
//!                                                    (1991) correction; capped at 1      (4)
//! ε_LB = 1/d                                         the lower bound                      (5)
//! W = det(S) / (tr(S)/d)^d                           Mauchly (1940)                       (6)
//! χ² = −(ν − (2d² + d + 2)/(6d)) · ln W,  df = d(d + 1)/2 − 1                             (7)
//! ```
//!
//! A corrected test multiplies both df by ε. Effect sizes: partial η² = SS/(SS + SS_error);
//! generalized η² = SS/(SS + Σ_E SS_error(E)), the sum over every error stratum including the
//! between-subjects one (Olejnik & Algina 2003, all factors manipulated; Bakeman 2005).
//!
//! Assumptions: independent subjects, normal residuals, equal covariance matrices across the
//! between groups, and (uncorrected) sphericity of each within stratum.
//!
//! Degenerate input: ν < 1 is refused; ν < d leaves Mauchly's W undefined (a note; ε is still
//! given); a singular S gives W = 0 and no χ² (a note); a stratum with no error variation
//! (a constant measure) gives F, p and ε as null with a note, never NaN.
//!
//! The default correction rule (`auto`): Greenhouse–Geisser when ε_GG < 0.75, otherwise
//! Huynh–Feldt — the recommendation of Huynh & Feldt (1976), common practice.

use super::linear::{CellStats, SsType, hypothesis, term_df, terms, within_contrasts};
use crate::dist::{chi2_sf, f_sf};
use crate::error::CellError;
use crate::render::fmt::es;
use nalgebra::DMatrix;
use serde::Serialize;

/// Which sphericity correction to apply.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Correction {
    /// Greenhouse–Geisser when ε_GG < 0.75, else Huynh–Feldt.
    Auto,
    /// Greenhouse–Geisser.
    Gg,
    /// Huynh–Feldt.
    Hf,
    /// None.
    None,
}

/// The input: complete subjects' cell values.
#[derive(Debug, Clone)]
pub struct RmData {
    /// N × C, within cells in mixed radix over `within` (first factor slowest).
    pub y: DMatrix<f64>,
    /// Between cell of each subject (mixed radix over `between`).
    pub group: Vec<usize>,
    /// Between factors: name and number of levels.
    pub between: Vec<(String, usize)>,
    /// Within factors: name and number of levels.
    pub within: Vec<(String, usize)>,
}

/// One effect row (keys as in `design/results.md`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct RmRow {
    /// Effect name, between factors first (`dose × day`).
    pub effect: String,
    /// The error stratum: `between subjects` or the within effect's name.
    pub stratum: String,
    /// Degrees of freedom.
    pub df: f64,
    /// Sum of squares.
    pub ss: f64,
    /// Mean square.
    pub ms: f64,
    /// F (null when the error has no variation).
    pub f: Option<f64>,
    /// Uncorrected p.
    pub p: Option<f64>,
    /// Error df.
    pub df_error: f64,
    /// Error SS.
    pub ss_error: f64,
    /// Partial η².
    pub eta2_partial: Option<f64>,
    /// Partial ω² (not defined here for stratified designs: null).
    pub omega2_partial: Option<f64>,
    /// Generalized η².
    pub eta2_generalized: Option<f64>,
    /// Greenhouse–Geisser ε (within effects).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gg_epsilon: Option<f64>,
    /// Huynh–Feldt ε.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hf_epsilon: Option<f64>,
    /// GG-corrected df.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gg_df: Option<f64>,
    /// GG-corrected error df.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gg_df_error: Option<f64>,
    /// GG-corrected p.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gg_p: Option<f64>,
    /// HF-corrected df.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hf_df: Option<f64>,
    /// HF-corrected error df.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hf_df_error: Option<f64>,
    /// HF-corrected p.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hf_p: Option<f64>,
    /// Lower-bound p.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub lb_p: Option<f64>,
    /// The correction applied: `greenhouse-geisser`, `huynh-feldt` or `none`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub correction: Option<String>,
    /// The p of the correction applied.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub p_corrected: Option<f64>,
    /// df and error df of the correction applied.
    #[serde(skip)]
    pub df_applied: (f64, f64),
}

/// One sphericity row (within effects with d ≥ 2).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct SphericityRow {
    /// The within effect.
    pub effect: String,
    /// Mauchly's W (null when undefined).
    pub w: Option<f64>,
    /// Its χ² approximation.
    pub chi2: Option<f64>,
    /// χ² df.
    pub df: f64,
    /// χ² upper tail.
    pub p: Option<f64>,
    /// Greenhouse–Geisser ε.
    pub gg_epsilon: Option<f64>,
    /// Huynh–Feldt ε (Lecoutre's correction, capped at 1).
    pub hf_epsilon: Option<f64>,
    /// 1/d.
    pub lower_bound: f64,
}

/// The fit.
#[derive(Debug, Clone)]
pub struct Rm {
    /// Effect rows: the between stratum first, then each within effect with its interactions.
    pub rows: Vec<RmRow>,
    /// Sphericity rows.
    pub sphericity: Vec<SphericityRow>,
    /// Notes (corrections applied and why, degenerate strata).
    pub notes: Vec<String>,
    /// Error strata: name, df, SS.
    pub strata: Vec<(String, f64, f64)>,
}

fn name_of(names: &[&str]) -> String {
    names.join(" × ")
}

/// Sphericity summary of an error SSCP `r` with `nu` df.
struct Sph {
    gg: Option<f64>,
    hf: Option<f64>,
    w: Option<f64>,
    chi2: Option<f64>,
    p: Option<f64>,
    chi_df: f64,
    note: Option<String>,
}

fn sphericity(r: &DMatrix<f64>, nu: f64, effect: &str, tiny: f64) -> Sph {
    let d = r.nrows() as f64;
    let chi_df = d * (d + 1.0) / 2.0 - 1.0;
    let s = r / nu;
    let tr = s.trace();
    let tr2 = (&s * &s).trace();
    if !(r.trace() > tiny && tr2 > 0.0) {
        return Sph {
            gg: None,
            hf: None,
            w: None,
            chi2: None,
            p: None,
            chi_df,
            note: Some(format!(
                "{effect}: the contrasts do not vary between subjects, so ε and Mauchly's test are undefined"
            )),
        };
    }
    let gg = (tr * tr / (d * tr2)).min(1.0); // (3)
    let den = d * (nu - d * gg);
    let hf = if den > 0.0 {
        (((nu + 1.0) * d * gg - 2.0) / den).min(1.0) // (4)
    } else {
        1.0
    };
    let mut note = None;
    let (w, chi2, p) = if nu < d {
        note = Some(format!(
            "{effect}: Mauchly's test needs at least {} subjects beyond the number of between groups ({} error df for {} contrasts), so W is undefined; ε is still given",
            d as usize, nu, d as usize
        ));
        (None, None, None)
    } else {
        // ln det(S) from the Cholesky factor, for stability.
        match s.clone().cholesky() {
            Some(ch) => {
                let ln_det: f64 = 2.0 * ch.l().diagonal().iter().map(|x| x.ln()).sum::<f64>();
                let ln_w = ln_det - d * (tr / d).ln(); // (6)
                let w = ln_w.exp().min(1.0);
                let mult = nu - (2.0 * d * d + d + 2.0) / (6.0 * d);
                let chi2 = (-mult * ln_w).max(0.0); // (7)
                (Some(w), Some(chi2), chi2_sf(chi2, chi_df))
            }
            None => {
                note = Some(format!(
                    "{effect}: the covariance of the contrasts is singular (some difference between levels is the same for every subject), so Mauchly's W is 0 and its χ² undefined"
                ));
                (Some(0.0), None, None)
            }
        }
    };
    Sph {
        gg: Some(gg),
        hf: Some(hf),
        w,
        chi2,
        p,
        chi_df,
        note,
    }
}

/// Fits the design.
pub fn fit(data: &RmData, ty: SsType, correction: Correction) -> Result<Rm, CellError> {
    let n = data.y.nrows();
    let bsizes: Vec<usize> = data.between.iter().map(|b| b.1).collect();
    let wsizes: Vec<usize> = data.within.iter().map(|w| w.1).collect();
    let g_cells: usize = bsizes.iter().product::<usize>().max(1);
    let nu = n as f64 - g_cells as f64;
    if nu < 1.0 {
        return Err(CellError::design(format!(
            "{n} subjects in {g_cells} between group{} leave no error degrees of freedom",
            if g_cells == 1 { "" } else { "s" }
        ))
        .note("at least one group needs two or more subjects"));
    }
    let bnames: Vec<&str> = data.between.iter().map(|b| b.0.as_str()).collect();
    let wnames: Vec<&str> = data.within.iter().map(|w| w.0.as_str()).collect();
    // Scale for "no variation": the total sum of squares of Y about its grand mean.
    let grand = data.y.mean();
    let total_ss: f64 = data.y.iter().map(|v| (v - grand) * (v - grand)).sum();
    if !(total_ss > 0.0) {
        return Err(CellError::data(format!(
            "all {} values are equal, so there is no variation and F is undefined",
            n * data.y.ncols()
        )));
    }
    let tiny = total_ss * 1e-13;
    let mut rows = Vec::new();
    let mut sph_rows = Vec::new();
    let mut notes = Vec::new();
    let mut strata = Vec::new();
    let mut applied: Vec<String> = Vec::new();
    for e in terms(data.within.len()) {
        let m = within_contrasts(&wsizes, &e); // (1)
        let z = &data.y * m;
        let d = z.ncols() as f64;
        let stats = CellStats::from_units(&bsizes, &data.group, &z);
        let ss_err = stats.within.trace().max(0.0);
        let df_err = d * nu;
        let e_name = name_of(&e.iter().map(|&f| wnames[f]).collect::<Vec<_>>());
        let stratum = if e.is_empty() {
            "between subjects".to_string()
        } else {
            e_name.clone()
        };
        strata.push((stratum.clone(), df_err, ss_err));
        let sph = if e.is_empty() {
            None
        } else if d >= 2.0 {
            let s = sphericity(&stats.within, nu, &e_name, tiny);
            if let Some(nt) = &s.note {
                notes.push(nt.clone());
            }
            sph_rows.push(SphericityRow {
                effect: e_name.clone(),
                w: s.w,
                chi2: s.chi2,
                df: s.chi_df,
                p: s.p,
                gg_epsilon: s.gg,
                hf_epsilon: s.hf,
                lower_bound: 1.0 / d,
            });
            Some(s)
        } else {
            None
        };
        // Which correction applies to this stratum, and why.
        let choice: Option<(&str, Option<f64>)> = if e.is_empty() {
            None
        } else if d < 2.0 {
            Some(("none", Some(1.0)))
        } else {
            let s = sph.as_ref().expect("sphericity computed for d ≥ 2");
            let pick = match (correction, s.gg) {
                (_, None) => ("none", None),
                (Correction::None, _) => ("none", Some(1.0)),
                (Correction::Gg, Some(g)) => ("greenhouse-geisser", Some(g)),
                (Correction::Hf, _) => ("huynh-feldt", s.hf),
                (Correction::Auto, Some(g)) if g < 0.75 => ("greenhouse-geisser", Some(g)),
                (Correction::Auto, Some(_)) => ("huynh-feldt", s.hf),
            };
            if correction == Correction::Auto {
                if let Some(g) = s.gg {
                    applied.push(if g < 0.75 {
                        format!(
                            "{e_name}: Greenhouse–Geisser, because ε_GG = {} is below .75",
                            es(g)
                        )
                    } else {
                        format!(
                            "{e_name}: Huynh–Feldt (ε = {}), because ε_GG = {} is .75 or more",
                            es(s.hf.unwrap_or(1.0)),
                            es(g)
                        )
                    });
                }
            }
            Some(pick)
        };
        let between_terms: Vec<Vec<usize>> = terms(data.between.len())
            .into_iter()
            .filter(|g| !(e.is_empty() && g.is_empty()))
            .collect();
        for g in between_terms {
            let h = hypothesis(&stats, &g, ty).ok_or_else(|| {
                CellError::design(
                    "the between-subjects design is singular: some group has no subjects",
                )
            })?;
            let ss = h.trace().max(0.0);
            let df = d * term_df(&bsizes, &g) as f64;
            let mut names: Vec<&str> = g.iter().map(|&j| bnames[j]).collect();
            names.extend(e.iter().map(|&f| wnames[f]));
            let effect = name_of(&names);
            let (f, p) = if ss_err > tiny {
                let f = (ss / df) / (ss_err / df_err); // (2)
                (Some(f), f_sf(f, df, df_err))
            } else {
                notes.push(format!(
                    "{effect}: its error term ({stratum}) has no variation, so F is undefined"
                ));
                (None, None)
            };
            let mut row = RmRow {
                effect,
                stratum: stratum.clone(),
                df,
                ss,
                ms: ss / df,
                f,
                p,
                df_error: df_err,
                ss_error: ss_err,
                eta2_partial: (ss + ss_err > 0.0).then(|| ss / (ss + ss_err)),
                omega2_partial: None,
                eta2_generalized: None,
                gg_epsilon: None,
                hf_epsilon: None,
                gg_df: None,
                gg_df_error: None,
                gg_p: None,
                hf_df: None,
                hf_df_error: None,
                hf_p: None,
                lb_p: None,
                correction: None,
                p_corrected: None,
                df_applied: (df, df_err),
            };
            if let Some((how, eps)) = choice {
                let (gg, hf) = match &sph {
                    Some(s) => (s.gg, s.hf),
                    None => (Some(1.0), Some(1.0)),
                };
                let corrected = |eps: Option<f64>| {
                    eps.map(|x| {
                        (
                            x * df,
                            x * df_err,
                            f.and_then(|f| f_sf(f, x * df, x * df_err)),
                        )
                    })
                };
                let (a, b) = (corrected(gg), corrected(hf));
                row.gg_epsilon = gg;
                row.hf_epsilon = hf;
                row.gg_df = a.map(|t| t.0);
                row.gg_df_error = a.map(|t| t.1);
                row.gg_p = a.and_then(|t| t.2);
                row.hf_df = b.map(|t| t.0);
                row.hf_df_error = b.map(|t| t.1);
                row.hf_p = b.and_then(|t| t.2);
                row.lb_p = corrected(Some(1.0 / d)).and_then(|t| t.2);
                row.correction = Some(how.to_string());
                let c = corrected(eps);
                row.p_corrected = c.and_then(|t| t.2);
                if let Some(c) = c {
                    row.df_applied = (c.0, c.1);
                }
            }
            rows.push(row);
        }
    }
    let err_total: f64 = strata.iter().map(|s| s.2).sum();
    for r in &mut rows {
        r.eta2_generalized = (r.ss + err_total > 0.0).then(|| r.ss / (r.ss + err_total));
    }
    let two_level: Vec<String> = terms(data.within.len())
        .into_iter()
        .filter(|e| !e.is_empty() && term_df(&wsizes, e) == 1)
        .map(|e| name_of(&e.iter().map(|&f| wnames[f]).collect::<Vec<_>>()))
        .collect();
    if !two_level.is_empty() {
        notes.push(format!(
            "{}: one contrast (two levels), spherical by construction; no correction is needed",
            two_level.join(", ")
        ));
    }
    if !applied.is_empty() {
        notes.push(format!(
            "sphericity correction: {}. The rule (Greenhouse–Geisser below ε = .75, else Huynh–Feldt) is common practice; `with correction gg`, `hf` or `none` chooses another",
            applied.join("; ")
        ));
    } else if correction != Correction::Auto && !sph_rows.is_empty() {
        notes.push(format!(
            "sphericity correction as asked: {}",
            match correction {
                Correction::Gg => "Greenhouse–Geisser",
                Correction::Hf => "Huynh–Feldt",
                _ => "none (the uncorrected F test assumes sphericity)",
            }
        ));
    }
    Ok(Rm {
        rows,
        sphericity: sph_rows,
        notes,
        strata,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 4 subjects × 3 occasions, one group, as a two-way layout without replication
    /// (subject × occasion), by hand: values s1: 1 2 3 / s2: 2 4 6 / s3: 3 3 3 / s4: 2 3 7;
    /// grand mean 39/12 = 3.25; occasion means 2, 3, 4.75 → SS_occ = 4·(1.5625 + 0.0625 + 2.25)
    /// = 15.5; subject means 2, 4, 3, 4 → SS_subj = 3·(1.5625 + 0.5625 + 0.0625 + 0.5625) = 8.25.
    #[test]
    fn one_within_matches_the_two_way_decomposition() {
        let vals = [1.0, 2.0, 3.0, 2.0, 4.0, 6.0, 3.0, 3.0, 3.0, 2.0, 3.0, 7.0];
        let y = DMatrix::from_row_slice(4, 3, &vals);
        let data = RmData {
            y,
            group: vec![0; 4],
            between: vec![],
            within: vec![("t".into(), 3)],
        };
        let r = fit(&data, SsType::Two, Correction::Auto).unwrap();
        // Hand arithmetic: Σy² = 1+4+9+4+16+36+9+9+9+4+9+49 = 159, SS_total = 159 − 126.75
        // = 32.25; SS_occ = 15.5; SS_subj = 8.25; SS_error = 32.25 − 15.5 − 8.25 = 8.5.
        let t = r.rows.iter().find(|x| x.effect == "t").unwrap();
        assert!((t.ss - 15.5).abs() < 1e-12, "{}", t.ss);
        assert!((t.ss_error - 8.5).abs() < 1e-12);
        assert_eq!((t.df, t.df_error), (2.0, 6.0));
        assert!((r.strata[0].2 - 8.25).abs() < 1e-12);
        let f = (15.5 / 2.0) / (8.5 / 6.0);
        assert!((t.f.unwrap() - f).abs() < 1e-12);
        // ηG² = 15.5 / (15.5 + 8.25 + 8.5) (Olejnik & Algina 2003, hand arithmetic).
        assert!((t.eta2_generalized.unwrap() - 15.5 / 32.25).abs() < 1e-12);
        let e = t.gg_epsilon.unwrap();
        assert!((0.5..=1.0).contains(&e));
    }
}
