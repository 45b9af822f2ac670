//! Keplerian disk fits: the black-hole mass from the line-of-sight velocities of a rotating
//! gas or water-maser disk measured along its major axis (docs/methods.md §4.8).
//!
//! Pure numerics: the doors convert the member's table (angles and distance) into
//! [`DiskPoint`]s in pc at the adopted distance and call the functions here.
//!
//! # Model
//!
//! ```text
//! r_k = |x_k − x_c|                                                   pc
//! v_model(x) = v_sys + σ_rot · sign(x − x_c) · sin i · √(G M(<r) / r)  km s⁻¹
//! M(<r) = M_BH + Υ L(<r) + M_c (r / r_c)^γ                            M☉ (stars, cluster optional)
//! −2 ln L = Σ_k [ (v_k − v_model(x_k))² / (e_k² + s²) + ln(2π (e_k² + s²)) ]
//! ```
//!
//! G = 4.30091727 × 10⁻³ pc M☉⁻¹ (km s⁻¹)² (docs/methods.md §5), σ_rot = ±1 the sense of
//! rotation (which side recedes), read from the data. The fitted parameters are θ = (log10
//! M_BH, v_sys, x_c, s[, Υ][, log10 M_c, γ]). The intrinsic velocity scatter s enters only as
//! s² and is reported as |s| ≥ 0 at its restricted (REML-like) estimate; the other parameters
//! are refitted at that s and their errors are the curvature errors with s held. −2 ln L, AIC,
//! BIC and the likelihood ratio are those of the maximum-likelihood fit.
//!
//! # References
//!
//! Newtonian circular orbits in a thin disk (textbook physics; docs/methods.md §4.6 and §4.8);
//! Patterson & Thompson 1971, Biometrika 58, 545 (restricted likelihood; from memory);
//! Akaike 1974, IEEE TAC 19, 716; Schwarz 1978, Ann. Stat. 6, 461; Wilks 1938, Ann. Math. Stat.
//! 9, 60; Goodman & Weare 2010, Comm. App. Math. Comp. Sci. 5, 65 (the posterior sampler).

use std::f64::consts::{LN_10, PI};

use nalgebra::DMatrix;
use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

use super::FitError;
use super::ensemble::{self, EnsembleConfig, ParamSummary};
use super::optimize::{self, Sum};
use super::posterior::PriorBounds;
use super::tolerance;

/// The parsec in metres (IAU 2015 Resolution B2: 648 000/π au; the same expression as
/// `astro::constants::PARSEC_M`, which the fit layer may not import; a test checks they agree).
const PARSEC_M: f64 = 648_000.0 / PI * 149_597_870_700.0;

/// G in pc M☉⁻¹ (km s⁻¹)², from the nominal GM☉ (IAU 2015 Resolution B3) and the parsec: the
/// same expression as `astro::constants::G_PC_KM2_S2_PER_MSUN` (a test checks they agree to
/// the last bit).
pub const G_PC_KM2_S2_PER_MSUN: f64 = 1.327_124_4e20 / PARSEC_M / 1.0e6;

/// Seconds in a Julian year (365.25 d).
const JULIAN_YEAR_S: f64 = 365.25 * 86_400.0;

/// Milliarcseconds per radian (648 000 000/π).
const MAS_PER_RADIAN: f64 = 648_000_000.0 / PI;

/// Largest |γ| of the cluster's enclosed-mass slope, M_c (r/r_c)^γ: 0 ≤ γ ≤ 3 (3 is a uniform
/// density; a larger slope would need the density to grow outwards).
pub const CLUSTER_GAMMA_MAX: f64 = 3.0;

/// One measured velocity along the major axis.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct DiskPoint {
    /// Signed offset along the major axis from the member's adopted centre, pc at the adopted
    /// distance (the doors convert angles: x = θ D).
    pub offset_pc: f64,
    /// Line-of-sight velocity, km s⁻¹ (any zero point; v_sys is fitted).
    pub v_km_s: f64,
    /// Its 1σ measurement error, km s⁻¹ (> 0).
    pub err_km_s: f64,
}

/// The disk's inclination to the sky (90° is edge-on).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum Inclination {
    /// Known from elsewhere (e.g. the shape of the disk): the fit is made at sin(deg) and the
    /// error `err_deg` is carried into log M_BH separately (docs/methods.md §4.8).
    Given {
        /// Inclination, degrees, strictly between 0 and 180.
        deg: f64,
        /// Its 1σ error, degrees (≥ 0).
        err_deg: f64,
    },
    /// Not known: along one major axis sin i and M are degenerate (v ∝ sin i √M), so the fit
    /// gives M sin² i ([`DiskFit::mass_is_m_sin2i`]).
    Unknown,
}

/// The enclosed light L(<r) of the stars, L☉ at r in pc.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum LightProfile {
    /// Plummer sphere: L(<r) = L_tot r³ / (r² + a²)^{3/2}.
    Plummer {
        /// Total luminosity, L☉ (> 0).
        l_total_lsun: f64,
        /// Plummer scale radius, pc (> 0).
        a_pc: f64,
    },
    /// Power law: L(<r) = L_ref (r / r_ref)^slope.
    PowerLaw {
        /// Light enclosed within `r_ref_pc`, L☉ (> 0).
        l_ref_lsun: f64,
        /// Reference radius, pc (> 0).
        r_ref_pc: f64,
        /// Logarithmic slope d ln L / d ln r, 0 < slope ≤ 3.
        slope: f64,
    },
    /// Tabulated (r pc, L(<r) L☉) pairs, radii strictly increasing, light positive and
    /// non-decreasing; interpolated linearly in log r–log L and extrapolated beyond either end
    /// as the power law of the nearest segment.
    Table(Vec<(f64, f64)>),
}

/// The stellar mass-to-light ratio Υ (M☉/L☉ in the band of the light profile).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum MassToLight {
    /// Held at this value (≥ 0).
    Fixed(f64),
    /// Fitted, Υ ≥ 0.
    Free,
}

/// An extended mass in the nucleus with fitted log10 M_c and γ: M_c (r / r_c)^γ.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ClusterSpec {
    /// The radius at which the cluster encloses M_c, pc (> 0), chosen by the member.
    pub r_c_pc: f64,
}

/// The mass beyond the black hole: stars (a light profile times Υ) and/or a dark cluster.
#[derive(Clone, Debug, PartialEq, Serialize, Default)]
pub struct Extended {
    /// The stars' enclosed light and their mass-to-light ratio.
    pub stars: Option<(LightProfile, MassToLight)>,
    /// A cluster with fitted mass and slope.
    pub cluster: Option<ClusterSpec>,
}

/// What a disk fit is given.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct DiskInput {
    /// The velocities along the major axis (row order does not matter).
    pub points: Vec<DiskPoint>,
    /// Adopted distance, Mpc (> 0): the offsets are in pc at this distance.
    pub distance_mpc: f64,
    /// Its 1σ error, Mpc (≥ 0), reported as a separate systematic error of log M_BH.
    pub distance_err_mpc: f64,
    /// The disk's inclination.
    pub inclination: Inclination,
}

/// The fitted cluster: (value, 1σ error) pairs.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ClusterFit {
    /// log10 (M_c / M☉), the cluster mass within `r_c_pc`.
    pub log_mc: (f64, f64),
    /// Enclosed-mass slope γ (0 … 3).
    pub gamma: (f64, f64),
    /// The radius r_c the member chose, pc.
    pub r_c_pc: f64,
    /// False when the data leave the cluster unconstrained (its mass inside the outermost
    /// point below 1 % of the black hole's and the likelihood flat in log M_c and γ): the
    /// values are then where the search stopped and their errors are reported as 0.
    pub constrained: bool,
}

/// One model's maximum-likelihood fit. Every (value, error) pair is a 1σ curvature error
/// (inverse Hessian of −ln L, docs/methods.md §4.8).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct DiskFit {
    /// "point mass", "point mass + stars", "point mass + cluster" or
    /// "point mass + stars + cluster".
    pub model: &'static str,
    /// log10 (M_BH / M☉) at the adopted distance and inclination (log10 (M_BH sin² i / M☉)
    /// when [`DiskFit::mass_is_m_sin2i`]).
    pub log_mbh: f64,
    /// Statistical (curvature) error of `log_mbh`, dex.
    pub log_mbh_err_stat: f64,
    /// Error of `log_mbh` from the inclination's error, 2 |cot i| σ_i / ln 10, dex (0 when the
    /// inclination is unknown or exact).
    pub log_mbh_err_inclination: f64,
    /// Error of `log_mbh` from the distance's error, σ_D / (D ln 10), dex (systematic: every
    /// point moves together).
    pub log_mbh_err_distance: f64,
    /// The three combined in quadrature, dex.
    pub log_mbh_err_total: f64,
    /// Systemic velocity and error, km s⁻¹.
    pub v_sys_km_s: (f64, f64),
    /// Fitted centre x_c and error, pc along the major axis (error 0 when held).
    pub centre_pc: (f64, f64),
    /// Whether the centre was held at the member's centre (x_c = 0): every point lies on one
    /// side of it, so the data cannot place the centre.
    pub centre_held: bool,
    /// Intrinsic velocity scatter s ≥ 0 and error, km s⁻¹: the restricted estimate (module
    /// documentation), error from the curvature of the restricted likelihood (0 when s sits at
    /// 0).
    pub scatter_km_s: (f64, f64),
    /// Stellar mass-to-light ratio and error (error 0 when held or at its bound 0), if the
    /// model has stars.
    pub upsilon: Option<(f64, f64)>,
    /// The cluster, if the model has one.
    pub cluster: Option<ClusterFit>,
    /// Every model parameter (name, value, 1σ error), θ order: "log_mbh", "v_sys", "x_c",
    /// "s", then "upsilon", "log_mc", "gamma" as present.
    pub params: Vec<(&'static str, f64, f64)>,
    /// Covariance of `params` (rows and columns in the same order; zero for held
    /// parameters).
    pub covariance: Vec<Vec<f64>>,
    /// Maximum of ln L (at the maximum-likelihood s, which may be below the quoted one).
    pub max_log_likelihood: f64,
    /// Number of fitted parameters (held ones excluded).
    pub n_params: usize,
    /// Number of points.
    pub n_points: usize,
    /// −2 ln L + 2 k.
    pub aic: f64,
    /// −2 ln L + k ln n.
    pub bic: f64,
    /// True when the inclination is unknown: `log_mbh` is then log10 (M_BH sin² i).
    pub mass_is_m_sin2i: bool,
    /// sin i used by the fit (1 when the inclination is unknown).
    pub sin_i: f64,
    /// +1 when the side of positive offsets recedes (v > v_sys), −1 when it approaches.
    pub rotation_sense: f64,
    /// v_k − v_model(x_k), km s⁻¹, in the input's row order.
    pub residuals: Vec<f64>,
    /// Smallest and largest fitted radius |x_k − x_c|, pc.
    pub radius_range_pc: (f64, f64),
}

/// Point mass against an extended model, fitted to the same input.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ModelComparison {
    /// AIC_extended − AIC_point (negative favours the extended model).
    pub delta_aic: f64,
    /// BIC_extended − BIC_point (negative favours the extended model).
    pub delta_bic: f64,
    /// Likelihood-ratio statistic Λ = 2 (ln L_extended − ln L_point), clamped at 0.
    pub lr_statistic: f64,
    /// Extra parameters of the extended model.
    pub df: usize,
    /// P(χ²_df > Λ) (None when df = 0). Conservative when a parameter sits on its bound
    /// (Υ = 0): the boundary halves it (Chernoff 1954).
    pub p_value: Option<f64>,
    /// The preferred model's name ([`DiskFit::model`]): the extended one when ΔBIC < 0.
    pub preferred: &'static str,
    /// One sentence for people.
    pub sentence: String,
}

/// The logarithmic slope of |v − v_sys| against r, against the −1/2 of a point mass.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SlopeFit {
    /// Fitted d ln|v − v_sys| / d ln r.
    pub slope: f64,
    /// Its 1σ error.
    pub slope_err: f64,
    /// −0.5 (Keplerian).
    pub expected: f64,
    /// (slope − expected) / error.
    pub z: f64,
    /// Points used (those on the rotating side of v_sys by more than 2σ).
    pub n_used: usize,
}

/// Posterior summary of a disk model.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct DiskPosterior {
    /// The model sampled ([`DiskFit::model`]).
    pub model: &'static str,
    /// log10 M_BH (or M_BH sin² i): median, 16/84 and 2.5/97.5 percentiles; the inclination's
    /// error is included when it was sampled. The distance error is not: add
    /// [`DiskFit::log_mbh_err_distance`] in quadrature.
    pub log_mbh: ParamSummary,
    /// Every sampled parameter.
    pub params: Vec<ParamSummary>,
    /// The flat priors (the inclination's Gaussian prior is stated in `inclination_prior`).
    pub priors: Vec<PriorBounds>,
    /// Gaussian prior (mean, sd) of the inclination in degrees, when it was sampled.
    pub inclination_prior: Option<(f64, f64)>,
    /// Fraction of accepted proposals after burn-in.
    pub acceptance_fraction: f64,
    /// Integrated autocorrelation time per parameter, steps.
    pub autocorr_time: Vec<f64>,
    /// Set when the chain is shorter than 50 autocorrelation times.
    pub warning: Option<String>,
    /// Posterior samples summarised.
    pub n_samples: usize,
    /// The sampler settings, seed included.
    pub config: EnsembleConfig,
}

/// One maser feature near the systemic velocity, seen drifting in velocity.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct MaserFeature {
    /// Angular radius of the feature's orbit from the dynamical centre, mas (> 0), with its
    /// error.
    pub radius_mas: f64,
    /// 1σ error of `radius_mas`, mas (≥ 0).
    pub radius_err_mas: f64,
    /// Rotation speed of the disk at that radius, km s⁻¹ (> 0; from the high-velocity
    /// features), with its error.
    pub v_rot_km_s: f64,
    /// 1σ error of `v_rot_km_s` (≥ 0).
    pub v_rot_err_km_s: f64,
    /// Measured drift dv/dt, km s⁻¹ yr⁻¹ (> 0; the sign is dropped by the caller).
    pub acceleration_km_s_yr: f64,
    /// 1σ error of the drift, km s⁻¹ yr⁻¹ (> 0).
    pub err: f64,
}

/// A geometric distance from maser accelerations.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct MaserDistance {
    /// Inverse-variance weighted mean distance, Mpc.
    pub distance_mpc: f64,
    /// Its 1σ error, Mpc.
    pub err_mpc: f64,
    /// Each feature's (radius pc, distance Mpc, error Mpc), in input order.
    pub per_feature: Vec<(f64, f64, f64)>,
    /// χ² of the features about the mean (n − 1 degrees of freedom).
    pub chi2: f64,
}

impl LightProfile {
    /// The light enclosed within r (pc), L☉ (0 at r ≤ 0).
    ///
    /// # Model
    /// ```text
    /// Plummer: L_tot r³/(r² + a²)^{3/2};  power law: L_ref (r/r_ref)^slope;
    /// table: exp of the linear interpolation of ln L in ln r (end segments extended)
    /// ```
    #[must_use]
    pub fn enclosed_lsun(&self, r_pc: f64) -> f64 {
        if r_pc <= 0.0 {
            return 0.0;
        }
        match self {
            LightProfile::Plummer { l_total_lsun, a_pc } => {
                let q = r_pc / a_pc;
                let w = 1.0 + q * q;
                l_total_lsun * q * q * q / (w * w.sqrt())
            }
            LightProfile::PowerLaw {
                l_ref_lsun,
                r_ref_pc,
                slope,
            } => l_ref_lsun * (r_pc / r_ref_pc).powf(*slope),
            LightProfile::Table(rows) => table_light(rows, r_pc),
        }
    }

    /// Checks the profile's numbers.
    ///
    /// # Errors
    /// [`FitError::InvalidSetting`] (setting "light_profile") naming the value at fault.
    pub fn check(&self) -> Result<(), FitError> {
        let bad = |reason: String| {
            Err(FitError::InvalidSetting {
                setting: "light_profile",
                reason,
            })
        };
        let pos = |v: f64| v.is_finite() && v > 0.0;
        match self {
            LightProfile::Plummer { l_total_lsun, a_pc } => {
                if !pos(*l_total_lsun) {
                    return bad(format!(
                        "the total light must be a number above 0 L☉, not {l_total_lsun}."
                    ));
                }
                if !pos(*a_pc) {
                    return bad(format!(
                        "the Plummer radius must be a number above 0 pc, not {a_pc}."
                    ));
                }
            }
            LightProfile::PowerLaw {
                l_ref_lsun,
                r_ref_pc,
                slope,
            } => {
                if !pos(*l_ref_lsun) {
                    return bad(format!(
                        "the reference light must be a number above 0 L☉, not {l_ref_lsun}."
                    ));
                }
                if !pos(*r_ref_pc) {
                    return bad(format!(
                        "the reference radius must be a number above 0 pc, not {r_ref_pc}."
                    ));
                }
                if !(slope.is_finite() && *slope > 0.0 && *slope <= 3.0) {
                    return bad(format!(
                        "the slope of the enclosed light must lie in (0, 3], not {slope}."
                    ));
                }
            }
            LightProfile::Table(rows) => {
                if rows.len() < 2 {
                    return bad(format!(
                        "a light table needs at least 2 rows, not {}.",
                        rows.len()
                    ));
                }
                for (k, &(r, l)) in rows.iter().enumerate() {
                    if !pos(r) || !pos(l) {
                        return bad(format!(
                            "row {k} of the light table must have a radius and light above 0, \
                             not ({r}, {l})."
                        ));
                    }
                    if k > 0 {
                        let (r0, l0) = rows[k - 1];
                        if r <= r0 {
                            return bad(format!(
                                "the radii of the light table must increase, and row {k} \
                                 ({r} pc) does not exceed row {} ({r0} pc).",
                                k - 1
                            ));
                        }
                        if l < l0 {
                            return bad(format!(
                                "the enclosed light cannot fall outwards, and row {k} ({l} L☉) \
                                 is below row {} ({l0} L☉).",
                                k - 1
                            ));
                        }
                    }
                }
            }
        }
        Ok(())
    }
}

/// Log–log interpolation of a checked light table, end segments extended as power laws.
fn table_light(rows: &[(f64, f64)], r: f64) -> f64 {
    let n = rows.len();
    let seg = match rows.iter().position(|&(rk, _)| rk >= r) {
        Some(0) => 0,
        Some(k) => k - 1,
        None => n - 2,
    };
    let (r0, l0) = rows[seg];
    let (r1, l1) = rows[seg + 1];
    let slope = (l1 / l0).ln() / (r1 / r0).ln();
    l0 * (r / r0).powf(slope)
}

/// The free model: which terms, how they are held, and the sense of rotation.
#[derive(Clone, Debug)]
struct Model<'a> {
    points: &'a [DiskPoint],
    sin_i: f64,
    sense: f64,
    stars: Option<(&'a LightProfile, Option<f64>)>,
    cluster_rc: Option<f64>,
    hold_centre: bool,
}

/// The mass terms of one θ: M_BH, Υ (0 without stars), M_c and γ (0 without a cluster).
struct Terms {
    m_bh: f64,
    ups: f64,
    m_c: f64,
    gamma: f64,
}

/// θ indices.
const I_LOGM: usize = 0;
const I_VSYS: usize = 1;
const I_XC: usize = 2;
const I_S: usize = 3;

impl Model<'_> {
    fn names(&self) -> Vec<&'static str> {
        let mut n = vec!["log_mbh", "v_sys", "x_c", "s"];
        if matches!(self.stars, Some((_, None))) {
            n.push("upsilon");
        }
        if self.cluster_rc.is_some() {
            n.push("log_mc");
            n.push("gamma");
        }
        n
    }

    fn upsilon_index(&self) -> Option<usize> {
        matches!(self.stars, Some((_, None))).then_some(4)
    }

    fn cluster_index(&self) -> Option<usize> {
        self.cluster_rc
            .map(|_| if self.upsilon_index().is_some() { 5 } else { 4 })
    }

    fn label(&self) -> &'static str {
        match (self.stars.is_some(), self.cluster_rc.is_some()) {
            (false, false) => "point mass",
            (true, false) => "point mass + stars",
            (false, true) => "point mass + cluster",
            (true, true) => "point mass + stars + cluster",
        }
    }

    /// θ's mass terms, computed once per likelihood evaluation.
    fn terms(&self, theta: &[f64]) -> Terms {
        let ups = match self.stars {
            Some((_, Some(fixed))) => fixed,
            Some((_, None)) => theta[self.upsilon_index().unwrap_or(4)],
            None => 0.0,
        };
        let (m_c, gamma) = match self.cluster_index() {
            Some(j) => (10f64.powf(theta[j]), theta[j + 1]),
            None => (0.0, 0.0),
        };
        Terms {
            m_bh: 10f64.powf(theta[I_LOGM]),
            ups,
            m_c,
            gamma,
        }
    }

    /// M(<r) in M☉ for the terms of θ.
    fn enclosed_with(&self, t: &Terms, r: f64) -> f64 {
        let mut m = t.m_bh;
        if let Some((profile, _)) = self.stars {
            m += t.ups * profile.enclosed_lsun(r);
        }
        if let Some(rc) = self.cluster_rc {
            m += t.m_c * (r / rc).powf(t.gamma);
        }
        m
    }

    fn velocity_with(&self, theta: &[f64], t: &Terms, x: f64) -> f64 {
        let d = x - theta[I_XC];
        let r = d.abs();
        theta[I_VSYS]
            + self.sense
                * d.signum()
                * self.sin_i
                * (G_PC_KM2_S2_PER_MSUN * self.enclosed_with(t, r) / r).sqrt()
    }

    fn velocity(&self, theta: &[f64], x: f64) -> f64 {
        self.velocity_with(theta, &self.terms(theta), x)
    }

    /// Whether θ lies where the model is defined; `strict` adds the physical bounds Υ ≥ 0 and
    /// 0 ≤ γ ≤ 3 (the likelihood itself continues smoothly across them while M(<r) > 0).
    fn in_support(&self, theta: &[f64], strict: bool) -> bool {
        if !theta.iter().all(|v| v.is_finite()) {
            return false;
        }
        if !strict {
            return true;
        }
        if let Some(j) = self.upsilon_index()
            && theta[j] < 0.0
        {
            return false;
        }
        if let Some(j) = self.cluster_index()
            && !(0.0..=CLUSTER_GAMMA_MAX).contains(&theta[j + 1])
        {
            return false;
        }
        true
    }

    /// −2 ln L, +∞ outside the physical bounds.
    fn neg2(&self, theta: &[f64]) -> f64 {
        self.neg2_at(theta, true)
    }

    /// −2 ln L continued across the bounds of Υ and γ, for finite differences at a bound.
    fn neg2_smooth(&self, theta: &[f64]) -> f64 {
        self.neg2_at(theta, false)
    }

    fn neg2_at(&self, theta: &[f64], strict: bool) -> f64 {
        if !self.in_support(theta, strict) {
            return f64::INFINITY;
        }
        let s2 = theta[I_S] * theta[I_S];
        let terms = self.terms(theta);
        let mut chi = Sum::default();
        // ln of the variances taken once per block of eight, as the ln of their product.
        let mut logs = Sum::default();
        let mut product = 1.0;
        for (k, p) in self.points.iter().enumerate() {
            let var = p.err_km_s * p.err_km_s + s2;
            let d = p.v_km_s - self.velocity_with(theta, &terms, p.offset_pc);
            chi.add(d * d / var);
            product *= var;
            if k % 8 == 7 {
                logs.add(product.ln());
                product = 1.0;
            }
        }
        logs.add(product.ln());
        logs.add(self.points.len() as f64 * (2.0 * PI).ln());
        let v = chi.total() + logs.total();
        if v.is_finite() { v } else { f64::INFINITY }
    }
}

/// Median of a non-empty slice (copied).
fn median(values: &[f64]) -> f64 {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// Checks the input; returns sin i (1 when unknown).
fn check_input(input: &DiskInput, n_free: usize) -> Result<f64, FitError> {
    for (row, p) in input.points.iter().enumerate() {
        for (v, column) in [
            (p.offset_pc, "offset_pc"),
            (p.v_km_s, "v_km_s"),
            (p.err_km_s, "err_km_s"),
        ] {
            if !v.is_finite() {
                return Err(FitError::NonFiniteInput { row, column });
            }
        }
        if p.err_km_s < 0.0 {
            return Err(FitError::NegativeError {
                row,
                column: "err_km_s",
            });
        }
        if p.err_km_s == 0.0 {
            return Err(FitError::InvalidSetting {
                setting: "err_km_s",
                reason: format!(
                    "row {row} has a velocity error of 0 km/s; every error must be above 0."
                ),
            });
        }
    }
    let min = n_free + 1;
    if input.points.len() < min {
        return Err(FitError::TooFewPoints {
            n: input.points.len(),
            min,
            method: "disk",
        });
    }
    let mut offsets: Vec<f64> = input.points.iter().map(|p| p.offset_pc).collect();
    offsets.sort_by(f64::total_cmp);
    offsets.dedup();
    if offsets.len() < 3 {
        return Err(FitError::InvalidSetting {
            setting: "offset_pc",
            reason: format!(
                "the points lie at only {} different offsets; a disk fit needs at least 3.",
                offsets.len()
            ),
        });
    }
    if !(input.distance_mpc.is_finite() && input.distance_mpc > 0.0) {
        return Err(FitError::InvalidSetting {
            setting: "distance_mpc",
            reason: format!(
                "the distance must be a number above 0 Mpc, not {}.",
                input.distance_mpc
            ),
        });
    }
    if !(input.distance_err_mpc.is_finite() && input.distance_err_mpc >= 0.0) {
        return Err(FitError::InvalidSetting {
            setting: "distance_err_mpc",
            reason: format!(
                "the distance error must be a number of at least 0 Mpc, not {}.",
                input.distance_err_mpc
            ),
        });
    }
    match input.inclination {
        Inclination::Unknown => Ok(1.0),
        Inclination::Given { deg, err_deg } => {
            if !(deg.is_finite() && deg > 0.0 && deg < 180.0) {
                return Err(FitError::InvalidSetting {
                    setting: "inclination_deg",
                    reason: format!(
                        "the inclination must lie strictly between 0 and 180 degrees \
                         (edge-on is 90), not {deg}."
                    ),
                });
            }
            if !(err_deg.is_finite() && err_deg >= 0.0) {
                return Err(FitError::InvalidSetting {
                    setting: "inclination_err_deg",
                    reason: format!(
                        "the inclination error must be a number of at least 0 degrees, not \
                         {err_deg}."
                    ),
                });
            }
            Ok(deg.to_radians().sin())
        }
    }
}

fn check_extended(extended: &Extended) -> Result<(), FitError> {
    if let Some((profile, ml)) = &extended.stars {
        profile.check()?;
        if let MassToLight::Fixed(u) = ml
            && !(u.is_finite() && *u >= 0.0)
        {
            return Err(FitError::InvalidSetting {
                setting: "mass_to_light",
                reason: format!("a held mass-to-light ratio must be at least 0, not {u}."),
            });
        }
    }
    if let Some(c) = &extended.cluster
        && !(c.r_c_pc.is_finite() && c.r_c_pc > 0.0)
    {
        return Err(FitError::InvalidSetting {
            setting: "cluster_radius_pc",
            reason: format!(
                "the cluster's radius must be a number above 0 pc, not {}.",
                c.r_c_pc
            ),
        });
    }
    Ok(())
}

/// Weighted least squares of v = v_sys + A sign(x − x_c) r^(−1/2) at fixed x_c: the exact
/// point-mass fit at s = 0 in (v_sys, A), used as the start. Returns (v_sys, A, χ²).
fn linear_start(points: &[DiskPoint], x_c: f64) -> Option<(f64, f64, f64)> {
    let (mut sw, mut sb, mut sbb, mut sv, mut sbv) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for p in points {
        let d = p.offset_pc - x_c;
        if d == 0.0 {
            return None;
        }
        let b = d.signum() / d.abs().sqrt();
        let w = 1.0 / (p.err_km_s * p.err_km_s);
        sw += w;
        sb += w * b;
        sbb += w * b * b;
        sv += w * p.v_km_s;
        sbv += w * b * p.v_km_s;
    }
    let det = sw * sbb - sb * sb;
    if !(det.is_finite() && det > 0.0) {
        return None;
    }
    let a = (sw * sbv - sb * sv) / det;
    let v0 = (sv - sb * a) / sw;
    let chi2 = points
        .iter()
        .map(|p| {
            let d = p.offset_pc - x_c;
            let r = p.v_km_s - v0 - a * d.signum() / d.abs().sqrt();
            r * r / (p.err_km_s * p.err_km_s)
        })
        .sum();
    Some((v0, a, chi2))
}

/// Whether the member's centre (offset 0) has points on one side only.
fn one_sided(points: &[DiskPoint]) -> bool {
    points.iter().all(|p| p.offset_pc > 0.0) || points.iter().all(|p| p.offset_pc < 0.0)
}

/// Point-mass start: (θ without extras, sense).
fn point_starts(
    input: &DiskInput,
    sin_i: f64,
    hold_centre: bool,
) -> Result<Vec<(Vec<f64>, f64)>, FitError> {
    let pts = &input.points;
    let mut centres = vec![0.0];
    if !hold_centre {
        // Trial centres in every gap between neighbouring offsets: the member's centre may
        // be off by more than the innermost spacing.
        let mut xs: Vec<f64> = pts.iter().map(|p| p.offset_pc).collect();
        xs.sort_by(f64::total_cmp);
        xs.dedup();
        for w in xs.windows(2) {
            for q in [0.25, 0.5, 0.75] {
                centres.push(w[0] + q * (w[1] - w[0]));
            }
        }
    }
    let mut trials: Vec<(f64, (f64, f64, f64))> = centres
        .iter()
        .filter_map(|&xc| linear_start(pts, xc).map(|s| (xc, s)))
        .collect();
    if trials.is_empty() {
        return Err(FitError::InvalidSetting {
            setting: "offset_pc",
            reason: "a point lies exactly at the held centre (offset 0), where the Keplerian \
                     speed is infinite; move the centre or drop the point."
                .to_owned(),
        });
    }
    trials.sort_by(|a, b| a.1.2.total_cmp(&b.1.2));
    let errs: Vec<f64> = pts.iter().map(|p| p.err_km_s).collect();
    let e_med = median(&errs);
    let n = pts.len() as f64;
    Ok(trials
        .iter()
        .take(3)
        .map(|&(xc, (v0, a, chi2))| {
            let sense = if a < 0.0 { -1.0 } else { 1.0 };
            let amp = a.abs().max(1e-3);
            let log_m = (amp * amp / (G_PC_KM2_S2_PER_MSUN * sin_i * sin_i)).log10();
            let excess = (chi2 / (n - 2.0).max(1.0) - 1.0).max(0.0);
            let s0 = (excess.sqrt() * e_med).max(0.1 * e_med);
            (vec![log_m, v0, xc, s0], sense)
        })
        .collect())
}

/// Minimises −2 ln L over the components of θ that are neither `fixed` nor a held centre,
/// from `start`; returns θ̂ (with s ≥ 0) and the minimum.
fn minimise(model: &Model<'_>, start: &[f64], steps: &[f64], fixed: &[bool]) -> (Vec<f64>, f64) {
    let free: Vec<usize> = (0..start.len())
        .filter(|&j| !(fixed[j] || model.hold_centre && j == I_XC))
        .collect();
    let full = |u: &[f64]| {
        let mut t = start.to_vec();
        for (k, &j) in free.iter().enumerate() {
            t[j] = u[k];
        }
        t
    };
    let u0: Vec<f64> = free.iter().map(|&j| start[j]).collect();
    let st: Vec<f64> = free.iter().map(|&j| steps[j]).collect();
    let max_it = tolerance::NM_ITERATIONS_PER_PARAM * free.len() as u64;
    let m = optimize::nelder_mead(|u| model.neg2(&full(u)), &u0, &st, max_it);
    let mut theta = full(&m.x);
    theta[I_S] = theta[I_S].abs();
    let f = model.neg2(&theta);
    (theta, f)
}

/// Puts a parameter the simplex left within a hair (10⁻⁶ of its simplex step) of a bound on
/// that bound (Υ = 0, γ = 0 or 3) and marks it held; the held centre is marked too.
fn pin_bounds(model: &Model<'_>, theta: &mut [f64], steps: &[f64]) -> Vec<bool> {
    let mut held = vec![false; theta.len()];
    held[I_XC] = model.hold_centre;
    if let Some(j) = model.upsilon_index()
        && theta[j] < 1e-6 * steps[j]
    {
        theta[j] = 0.0;
        held[j] = true;
    }
    if let Some(j) = model.cluster_index() {
        let g = j + 1;
        for bound in [0.0, CLUSTER_GAMMA_MAX] {
            if (theta[g] - bound).abs() < 1e-6 * steps[g] {
                theta[g] = bound;
                held[g] = true;
            }
        }
    }
    held
}

/// The restricted (REML-like) estimate of s and its error: s maximising the likelihood of
/// the residuals with the mean parameters integrated out in the Laplace (Gauss–Newton)
/// approximation, with the residuals and Jacobian taken at the maximum-likelihood point.
///
/// ```text
/// −2 ln L_R(s) = Σ_k [ r_k² / (e_k² + s²) + ln(e_k² + s²) ] + ln det(Jᵀ W(s) J)
/// J_ka = ∂v_model(x_k)/∂θ_a over the fitted mean parameters, W = diag(1/(e_k² + s²))
/// σ_s² = 2 / (d²(−2 ln L_R)/ds²)
/// ```
/// For a model linear in its mean parameters this is exactly restricted maximum likelihood
/// (Patterson & Thompson 1971), which removes the small-sample bias of the ML variance.
fn restricted_scatter(model: &Model<'_>, theta: &[f64], mean: &[usize], e_med: f64) -> (f64, f64) {
    let pts = model.points;
    let (r_min, _) = radius_range(pts, theta[I_XC]);
    let mut jac = DMatrix::<f64>::zeros(pts.len(), mean.len());
    let mut t = theta.to_vec();
    for (a, &j) in mean.iter().enumerate() {
        let typical = match j {
            I_XC => r_min,
            I_VSYS => 10.0,
            _ => 1.0,
        };
        let h = 1e-6 * theta[j].abs().max(typical);
        for (k, p) in pts.iter().enumerate() {
            t[j] = theta[j] + h;
            let up = model.velocity(&t, p.offset_pc);
            t[j] = theta[j] - h;
            let down = model.velocity(&t, p.offset_pc);
            t[j] = theta[j];
            jac[(k, a)] = (up - down) / (2.0 * h);
        }
    }
    let res: Vec<f64> = pts
        .iter()
        .map(|p| p.v_km_s - model.velocity(theta, p.offset_pc))
        .collect();
    let g = |s: f64| {
        let s2 = s * s;
        let mut total = Sum::default();
        let mut info = DMatrix::<f64>::zeros(mean.len(), mean.len());
        for (k, p) in pts.iter().enumerate() {
            let var = p.err_km_s * p.err_km_s + s2;
            total.add(res[k] * res[k] / var + var.ln());
            let row = jac.row(k);
            info += row.transpose() * row / var;
        }
        match info.cholesky() {
            Some(c) => {
                let l = c.l();
                total.total() + 2.0 * (0..mean.len()).map(|i| l[(i, i)].ln()).sum::<f64>()
            }
            None => f64::INFINITY,
        }
    };
    let rms = (res.iter().map(|r| r * r).sum::<f64>() / res.len() as f64).sqrt();
    let hi = 4.0 * theta[I_S].max(rms).max(e_med);
    let (s_b, g_b, _) = optimize::brent_min(g, 0.0, hi, 1e-6 * e_med);
    let g0 = g(0.0);
    if !g_b.is_finite() && !g0.is_finite() {
        return (theta[I_S], 0.0);
    }
    if g0 <= g_b || s_b < 1e-3 * e_med {
        return (0.0, 0.0);
    }
    let h = (0.01 * s_b).max(1e-4 * e_med);
    let d2 = (g(s_b + h) - 2.0 * g_b + g(s_b - h)) / (h * h);
    let err = if d2 > 0.0 { (2.0 / d2).sqrt() } else { 0.0 };
    (s_b, err)
}

/// Covariance of θ at the optimum (2 H⁻¹ over the unheld components, zero rows for the held),
/// after a Newton polish of the unheld components. The Hessian uses −2 ln L continued across
/// the bounds, so a parameter just inside one still has central differences.
fn curvature(
    model: &Model<'_>,
    theta: &mut [f64],
    held: &[bool],
) -> Result<Vec<Vec<f64>>, FitError> {
    let idx: Vec<usize> = (0..theta.len()).filter(|&j| !held[j]).collect();
    let base = theta.to_vec();
    let embed = |u: &[f64]| {
        let mut t = base.clone();
        for (k, &j) in idx.iter().enumerate() {
            t[j] = u[k];
        }
        t
    };
    let strict = |u: &[f64]| model.neg2(&embed(u));
    let smooth = |u: &[f64]| model.neg2_smooth(&embed(u));
    let mut u: Vec<f64> = idx.iter().map(|&j| theta[j]).collect();
    let (r_min, _) = radius_range(model.points, theta[I_XC]);
    let typical: Vec<f64> = idx
        .iter()
        .map(|&j| match j {
            I_VSYS => 10.0,
            I_XC => r_min,
            _ => 1.0,
        })
        .collect();
    let h = optimize::hessian_steps(smooth, &u, &typical);
    let mut f = strict(&u);
    optimize::newton_polish(strict, &mut u, &mut f, &h, tolerance::NEWTON_MAX_STEPS);
    let h = optimize::hessian_steps(smooth, &u, &typical);
    let hm = optimize::hessian(smooth, &u, &h);
    for (k, &j) in idx.iter().enumerate() {
        theta[j] = u[k];
    }
    let inv = optimize::invert_spd(&hm).ok_or_else(|| FitError::Unsupported {
        what: "The disk data do not constrain every parameter of this model (the likelihood \
               is flat or not curved upwards at its maximum); fit a simpler model or add \
               points."
            .to_owned(),
    })?;
    let cov_sub: DMatrix<f64> = inv * 2.0;
    let n = theta.len();
    let mut cov = vec![vec![0.0; n]; n];
    for (a, &i) in idx.iter().enumerate() {
        for (b, &j) in idx.iter().enumerate() {
            cov[i][j] = cov_sub[(a, b)];
        }
    }
    Ok(cov)
}

fn radius_range(points: &[DiskPoint], x_c: f64) -> (f64, f64) {
    points.iter().fold((f64::INFINITY, 0.0_f64), |(lo, hi), p| {
        let r = (p.offset_pc - x_c).abs();
        (lo.min(r), hi.max(r))
    })
}

fn fit_model(input: &DiskInput, extended: Option<&Extended>) -> Result<DiskFit, FitError> {
    let ext = extended.cloned().unwrap_or_default();
    check_extended(&ext)?;
    let hold_centre = one_sided(&input.points);
    let stars = ext.stars.as_ref().map(|(p, ml)| {
        (
            p,
            match ml {
                MassToLight::Fixed(u) => Some(*u),
                MassToLight::Free => None,
            },
        )
    });
    let extra =
        usize::from(matches!(stars, Some((_, None)))) + if ext.cluster.is_some() { 2 } else { 0 };
    let n_free = 4 - usize::from(hold_centre) + extra;
    let sin_i = check_input(input, n_free)?;
    let errs: Vec<f64> = input.points.iter().map(|p| p.err_km_s).collect();
    let e_med = median(&errs);
    let mut model = Model {
        points: &input.points,
        sin_i,
        sense: 1.0,
        stars: None,
        cluster_rc: None,
        hold_centre,
    };
    let point_steps = |x_c: f64| {
        let (r_min, _) = radius_range(&input.points, x_c);
        vec![0.1, e_med.max(1.0), 0.2 * r_min, (0.3 * e_med).max(0.1)]
    };
    // The point-mass fit first, from the best trial centres: the start of every extended
    // model.
    let mut pm_best: Option<(Vec<f64>, f64, f64)> = None;
    for (p0, sense) in point_starts(input, sin_i, hold_centre)? {
        model.sense = sense;
        let (t, f) = minimise(&model, &p0, &point_steps(p0[I_XC]), &[false; 4]);
        if pm_best.as_ref().is_none_or(|b| f < b.1) {
            pm_best = Some((t, f, sense));
        }
    }
    let Some((pm, _, sense)) = pm_best else {
        return Err(FitError::NotConverged {
            iterations: tolerance::NM_ITERATIONS_PER_PARAM,
        });
    };
    model.sense = sense;
    let (_, r_max0) = radius_range(&input.points, pm[I_XC]);
    let step_base = point_steps(pm[I_XC]);
    model.stars = stars;
    model.cluster_rc = ext.cluster.as_ref().map(|c| c.r_c_pc);
    let mut starts: Vec<Vec<f64>> = Vec::new();
    let mut steps = step_base.clone();
    if extended.is_none() || extra == 0 && stars.is_none() && ext.cluster.is_none() {
        starts.push(pm.clone());
    } else {
        // Mass the point-mass fit puts inside the outermost radius, and the light there.
        let m_bh = 10f64.powf(pm[I_LOGM]);
        let mut ups_starts = vec![None];
        if let Some((profile, None)) = stars {
            let l_out = profile.enclosed_lsun(r_max0).max(f64::MIN_POSITIVE);
            let scale = (m_bh / l_out).max(1e-12);
            ups_starts = vec![Some(0.0), Some(0.3 * scale), Some(scale)];
            steps.push(0.3 * scale);
        }
        let mut cl_starts = vec![None];
        if let Some(c) = &ext.cluster {
            cl_starts = vec![
                Some((pm[I_LOGM] - 1.0 + (r_max0 / c.r_c_pc).log10().min(0.0), 1.5)),
                Some((pm[I_LOGM] - 0.3, 2.5)),
            ];
            steps.push(0.3);
            steps.push(0.3);
        }
        for u in &ups_starts {
            for c in &cl_starts {
                let mut t = pm.clone();
                if u.is_some_and(|u| u > 0.0) {
                    // Some of the point mass's mass goes to the stars.
                    t[I_LOGM] -= 0.2;
                }
                if let Some(u) = u {
                    t.push(*u);
                }
                if let Some((lm, g)) = c {
                    t.push(*lm);
                    t.push(*g);
                }
                starts.push(t);
            }
        }
    }
    let mut best: Option<(Vec<f64>, f64)> = None;
    let free = vec![false; steps.len()];
    for s in &starts {
        let (t, f) = minimise(&model, s, &steps, &free);
        if best.as_ref().is_none_or(|b| f < b.1) {
            best = Some((t, f));
        }
    }
    // Once more from the best optimum: the simplex can stall near a bound.
    if starts.len() > 1
        && let Some((t, f)) = &best
    {
        let (t2, f2) = minimise(&model, t, &steps, &free);
        if f2 < *f {
            best = Some((t2, f2));
        }
    }
    let Some((mut theta, mut f)) = best.filter(|b| b.1.is_finite()) else {
        return Err(FitError::NotConverged {
            iterations: tolerance::NM_ITERATIONS_PER_PARAM,
        });
    };
    // A parameter on its bound is held there, the others refitted.
    let mut held = pin_bounds(&model, &mut theta, &steps);
    if held.iter().enumerate().any(|(j, h)| *h && j != I_XC) {
        let (t, f2) = minimise(&model, &theta, &steps, &held);
        if f2 <= f {
            theta = t;
            f = f2;
        }
    }
    let ml_neg2 = f;
    // s at its restricted estimate, the mean parameters refitted at that s.
    let mean: Vec<usize> = (0..theta.len()).filter(|&j| !held[j] && j != I_S).collect();
    let (s_r, s_err) = restricted_scatter(&model, &theta, &mean, e_med);
    held[I_S] = true;
    if (s_r - theta[I_S]).abs() > 1e-9 * e_med {
        theta[I_S] = s_r;
        theta = minimise(&model, &theta, &steps, &held).0;
    }
    let mut cluster_constrained = true;
    let mut cov = match (curvature(&model, &mut theta, &held), model.cluster_index()) {
        (Ok(c), _) => c,
        // A cluster too light to matter (its mass inside the outermost radius below 1 % of
        // the black hole's) leaves log M_c and γ unconstrained: held for the curvature.
        (Err(e), Some(j)) => {
            let r_max = radius_range(&input.points, theta[I_XC]).1;
            let rc = model.cluster_rc.unwrap_or(1.0);
            let m_c = 10f64.powf(theta[j]) * (r_max / rc).powf(theta[j + 1]);
            if m_c >= 0.01 * 10f64.powf(theta[I_LOGM]) {
                return Err(e);
            }
            held[j] = true;
            held[j + 1] = true;
            cluster_constrained = false;
            curvature(&model, &mut theta, &held)?
        }
        (Err(e), None) => return Err(e),
    };
    cov[I_S][I_S] = s_err * s_err;
    let mut fit = assemble(input, &model, &theta, ml_neg2, cov, n_free);
    if let Some(c) = fit.cluster.as_mut() {
        c.constrained = cluster_constrained;
    }
    Ok(fit)
}

fn assemble(
    input: &DiskInput,
    model: &Model<'_>,
    theta: &[f64],
    neg2: f64,
    cov: Vec<Vec<f64>>,
    n_params: usize,
) -> DiskFit {
    let names = model.names();
    let err = |j: usize| cov[j][j].max(0.0).sqrt();
    let params: Vec<(&'static str, f64, f64)> = names
        .iter()
        .enumerate()
        .map(|(j, &n)| (n, theta[j], err(j)))
        .collect();
    let stat = err(I_LOGM);
    let incl = match input.inclination {
        Inclination::Given { deg, err_deg } => {
            let i = deg.to_radians();
            2.0 * (i.cos() / i.sin()).abs() * err_deg.to_radians() / LN_10
        }
        Inclination::Unknown => 0.0,
    };
    let dist = input.distance_err_mpc / (input.distance_mpc * LN_10);
    let n = input.points.len();
    let residuals = input
        .points
        .iter()
        .map(|p| p.v_km_s - model.velocity(theta, p.offset_pc))
        .collect();
    let upsilon = model.stars.map(|(_, fixed)| match fixed {
        Some(u) => (u, 0.0),
        None => {
            let j = model.upsilon_index().unwrap_or(4);
            (theta[j], err(j))
        }
    });
    let cluster = match (model.cluster_rc, model.cluster_index()) {
        (Some(rc), Some(j)) => Some(ClusterFit {
            log_mc: (theta[j], err(j)),
            gamma: (theta[j + 1], err(j + 1)),
            r_c_pc: rc,
            constrained: true,
        }),
        _ => None,
    };
    let k = n_params as f64;
    DiskFit {
        model: model.label(),
        log_mbh: theta[I_LOGM],
        log_mbh_err_stat: stat,
        log_mbh_err_inclination: incl,
        log_mbh_err_distance: dist,
        log_mbh_err_total: (stat * stat + incl * incl + dist * dist).sqrt(),
        v_sys_km_s: (theta[I_VSYS], err(I_VSYS)),
        centre_pc: (theta[I_XC], err(I_XC)),
        centre_held: model.hold_centre,
        scatter_km_s: (theta[I_S], err(I_S)),
        upsilon,
        cluster,
        params,
        covariance: cov,
        max_log_likelihood: -0.5 * neg2,
        n_params,
        n_points: n,
        aic: neg2 + 2.0 * k,
        bic: neg2 + k * (n as f64).ln(),
        mass_is_m_sin2i: matches!(input.inclination, Inclination::Unknown),
        sin_i: model.sin_i,
        rotation_sense: model.sense,
        residuals,
        radius_range_pc: radius_range(&input.points, theta[I_XC]),
    }
}

/// Fits a point mass (a black hole alone) to the disk.
///
/// # Model
/// ```text
/// v_model(x) = v_sys + σ_rot sign(x − x_c) sin i √(G M_BH / |x − x_c|)
/// θ = (log10 M_BH, v_sys, x_c, s); x_c held at 0 when every point lies on one side of 0
/// ```
/// (module documentation; docs/methods.md §4.8). The start is the weighted least-squares fit
/// of (v_sys, A = σ_rot sin i √(G M)) at trial centres; then Nelder–Mead, a Newton polish
/// and the curvature errors.
///
/// # Errors
/// [`FitError::NonFiniteInput`], [`FitError::NegativeError`] naming the row (0-based) and
/// column; [`FitError::InvalidSetting`] for a zero error, fewer than 3 distinct offsets, a
/// bad distance or inclination; [`FitError::TooFewPoints`] (one point more than the free
/// parameters); [`FitError::Unsupported`] when the likelihood is not curved at its maximum.
///
/// # References
/// docs/methods.md §4.6 and §4.8.
pub fn fit_point_mass(input: &DiskInput) -> Result<DiskFit, FitError> {
    fit_model(input, None)
}

/// Fits the black hole plus the extended mass of `extended` (stars with held or free Υ, a
/// cluster with free log M_c and γ).
///
/// # Model
/// ```text
/// M(<r) = M_BH + Υ L(<r) + M_c (r / r_c)^γ;  Υ ≥ 0, 0 ≤ γ ≤ 3
/// ```
/// Started from the point-mass fit with several Υ and cluster starts; the best optimum is
/// kept. A parameter at its bound (Υ = 0, γ = 0 or 3) is held there for the curvature errors
/// but still counted in AIC and BIC.
///
/// # Errors
/// As [`fit_point_mass`]; [`FitError::InvalidSetting`] for a bad light profile, held Υ or
/// cluster radius.
///
/// # References
/// docs/methods.md §4.8.
pub fn fit_extended(input: &DiskInput, extended: &Extended) -> Result<DiskFit, FitError> {
    fit_model(input, Some(extended))
}

/// Compares a point-mass fit with an extended fit of the same input.
///
/// # Model
/// ```text
/// Λ = 2 (ln L_ext − ln L_point) ≥ 0,  df = k_ext − k_point,  p = P(χ²_df > Λ)
/// ΔAIC = AIC_ext − AIC_point,  ΔBIC = BIC_ext − BIC_point;  preferred: extended if ΔBIC < 0
/// ```
///
/// # Errors
/// None (both fits must come from the same input).
///
/// # References
/// Wilks 1938; Akaike 1974; Schwarz 1978; Chernoff 1954, Ann. Math. Stat. 25, 573 (boundary).
#[must_use]
pub fn compare(point: &DiskFit, extended: &DiskFit) -> ModelComparison {
    let lr = (2.0 * (extended.max_log_likelihood - point.max_log_likelihood)).max(0.0);
    let df = extended.n_params.saturating_sub(point.n_params);
    let p_value = (df > 0)
        .then(|| ChiSquared::new(df as f64).ok().map(|c| c.sf(lr)))
        .flatten();
    let delta_aic = extended.aic - point.aic;
    let delta_bic = extended.bic - point.bic;
    let preferred = if delta_bic < 0.0 {
        extended.model
    } else {
        point.model
    };
    let p_text = p_value.map_or_else(String::new, |p| format!(", p = {p:.3}"));
    let sentence = format!(
        "The {preferred} model is preferred: ΔBIC = {delta_bic:.1} and ΔAIC = {delta_aic:.1} \
         for the {} model against the point mass (likelihood ratio {lr:.2} on {df} extra \
         parameter{}{p_text}).",
        extended.model,
        if df == 1 { "" } else { "s" }
    );
    ModelComparison {
        delta_aic,
        delta_bic,
        lr_statistic: lr,
        df,
        p_value,
        preferred,
        sentence,
    }
}

/// The slope of ln|v − v_sys| against ln r, fitted by weighted least squares to the points
/// that lie on the rotating side of v_sys by more than twice their error.
///
/// # Model
/// ```text
/// ln|v_k − v_sys| = c + p ln r_k,   σ_ln,k = √(e_k² + s²) / |v_k − v_sys|
/// ```
/// A point mass gives p = −1/2; a flatter (less negative) slope shows extended mass.
///
/// # Errors
/// [`FitError::TooFewPoints`] when fewer than 3 points qualify; [`FitError::NoSpreadInX`] when
/// they share one radius.
///
/// # References
/// docs/methods.md §4.8 (common practice).
pub fn velocity_slope(input: &DiskInput, fit: &DiskFit) -> Result<SlopeFit, FitError> {
    let (v_sys, x_c, s) = (fit.v_sys_km_s.0, fit.centre_pc.0, fit.scatter_km_s.0);
    let mut rows = Vec::new();
    for p in &input.points {
        let d = p.offset_pc - x_c;
        let dv = fit.rotation_sense * d.signum() * (p.v_km_s - v_sys);
        let sig = p.err_km_s.hypot(s);
        if d != 0.0 && dv > 2.0 * sig {
            rows.push((d.abs().ln(), dv.ln(), sig / dv));
        }
    }
    if rows.len() < 3 {
        return Err(FitError::TooFewPoints {
            n: rows.len(),
            min: 3,
            method: "velocity slope",
        });
    }
    let (mut sw, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for &(x, y, e) in &rows {
        let w = 1.0 / (e * e);
        sw += w;
        sx += w * x;
        sy += w * y;
        sxx += w * x * x;
        sxy += w * x * y;
    }
    let det = sw * sxx - sx * sx;
    if det.is_nan() || det <= 1e-12 * sw * sxx.abs().max(1.0) {
        return Err(FitError::NoSpreadInX);
    }
    let slope = (sw * sxy - sx * sy) / det;
    let slope_err = (sw / det).sqrt();
    Ok(SlopeFit {
        slope,
        slope_err,
        expected: -0.5,
        z: (slope + 0.5) / slope_err,
        n_used: rows.len(),
    })
}

/// The fitted model's line-of-sight velocity at `offset_pc`, km s⁻¹, for chart curves; None at
/// the centre itself (r = 0, where the Keplerian speed is infinite). Pass the `Extended` the
/// fit was made with (its light profile), or None for a point-mass fit.
///
/// # Model
/// ```text
/// v = v_sys + σ_rot sign(x − x_c) sin i √(G M(<r)/r)
/// ```
#[must_use]
pub fn model_velocity(fit: &DiskFit, extended: Option<&Extended>, offset_pc: f64) -> Option<f64> {
    let d = offset_pc - fit.centre_pc.0;
    let m = enclosed_mass_msun(fit, extended, d.abs())?;
    Some(
        fit.v_sys_km_s.0
            + fit.rotation_sense
                * d.signum()
                * fit.sin_i
                * (G_PC_KM2_S2_PER_MSUN * m / d.abs()).sqrt(),
    )
}

/// The fitted model's enclosed mass M(<r), M☉ (M sin² i when the inclination is unknown);
/// None for r ≤ 0 or a non-finite r.
///
/// # Model
/// ```text
/// M(<r) = M_BH + Υ L(<r) + M_c (r / r_c)^γ
/// ```
#[must_use]
pub fn enclosed_mass_msun(fit: &DiskFit, extended: Option<&Extended>, r_pc: f64) -> Option<f64> {
    if !(r_pc.is_finite() && r_pc > 0.0) {
        return None;
    }
    let mut m = 10f64.powf(fit.log_mbh);
    if let (Some((u, _)), Some((profile, _))) =
        (fit.upsilon, extended.and_then(|e| e.stars.as_ref()))
    {
        m += u * profile.enclosed_lsun(r_pc);
    }
    if let Some(c) = &fit.cluster {
        m += 10f64.powf(c.log_mc.0) * (r_pc / c.r_c_pc).powf(c.gamma.0);
    }
    Some(m)
}

/// The mean density inside a sphere of radius `r_min_pc` holding `mass_msun`, M☉ pc⁻³: a
/// lower bound on the central density when r_min is the innermost fitted radius.
///
/// # Model
/// ```text
/// ρ = M / (4/3 π r³)
/// ```
///
/// # Errors
/// [`FitError::InvalidSetting`] unless both are finite and above 0.
///
/// # References
/// docs/methods.md §4.8 (common practice).
pub fn minimum_density(mass_msun: f64, r_min_pc: f64) -> Result<f64, FitError> {
    for (v, setting) in [(mass_msun, "mass_msun"), (r_min_pc, "r_min_pc")] {
        if !(v.is_finite() && v > 0.0) {
            return Err(FitError::InvalidSetting {
                setting,
                reason: format!("{setting} must be a number above 0, not {v}."),
            });
        }
    }
    Ok(mass_msun / (4.0 / 3.0 * PI * r_min_pc.powi(3)))
}

/// The default sampler settings of [`posterior`]: 32 walkers, 3,000 steps, 1,000 burn-in.
#[must_use]
pub fn default_posterior_config(seed: u64) -> EnsembleConfig {
    EnsembleConfig {
        walkers: 32,
        steps: 3_000,
        burn_in: 1_000,
        seed,
        init_scatter: 0.1,
    }
}

/// Samples the posterior of the model `fit` was made with (pass the same `extended`), with
/// [`default_posterior_config`].
///
/// # Model
/// ```text
/// p(θ | v) ∝ L(v | θ) π(θ), flat priors (bounded):
///   log_mbh   log M̂ ± 5 dex          v_sys   v̂_sys ± 5,000 km/s
///   x_c       between the smallest and largest offset (sampled only when fitted)
///   s         0 … 5,000 km/s          upsilon  0 … 1,000 × (M̂_BH / L(<r_max)) + 100
///   log_mc    log M̂_c ± 5 dex         gamma    0 … 3
///   inclination (Given with err > 0): Gaussian N(i, σ_i) truncated to (0°, 180°)
/// ```
/// log M_BH is summarised by its median and 16/84 % percentiles.
///
/// # Errors
/// As [`fit_point_mass`] / [`fit_extended`] for the input; [`FitError::InvalidSetting`] from
/// the sampler.
///
/// # References
/// Goodman & Weare 2010; docs/methods.md §4.8.
pub fn posterior(
    input: &DiskInput,
    fit: &DiskFit,
    extended: Option<&Extended>,
    seed: u64,
) -> Result<DiskPosterior, FitError> {
    posterior_with(input, fit, extended, &default_posterior_config(seed))
}

/// As [`posterior`] with explicit sampler settings.
///
/// # Errors
/// As [`posterior`].
pub fn posterior_with(
    input: &DiskInput,
    fit: &DiskFit,
    extended: Option<&Extended>,
    cfg: &EnsembleConfig,
) -> Result<DiskPosterior, FitError> {
    let ext = extended.cloned().unwrap_or_default();
    check_extended(&ext)?;
    let sin_i = check_input(input, fit.n_params)?;
    let stars = ext.stars.as_ref().map(|(p, ml)| {
        (
            p,
            match ml {
                MassToLight::Fixed(u) => Some(*u),
                MassToLight::Free => None,
            },
        )
    });
    let model = Model {
        points: &input.points,
        sin_i,
        sense: fit.rotation_sense,
        stars,
        cluster_rc: ext.cluster.as_ref().map(|c| c.r_c_pc),
        hold_centre: fit.centre_held,
    };
    let all_names = model.names();
    if all_names.len() != fit.params.len() {
        return Err(FitError::InvalidSetting {
            setting: "extended",
            reason: "the extended model given differs from the one the fit was made with."
                .to_owned(),
        });
    }
    let theta_hat: Vec<f64> = fit.params.iter().map(|p| p.1).collect();
    let sampled: Vec<usize> = (0..all_names.len())
        .filter(|&j| !(model.hold_centre && j == I_XC))
        .collect();
    let (x_lo, x_hi) = input
        .points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
            (a.min(p.offset_pc), b.max(p.offset_pc))
        });
    let m_hat = 10f64.powf(fit.log_mbh);
    let ups_hi = stars.map_or(100.0, |(p, _)| {
        1000.0 * m_hat
            / p.enclosed_lsun(fit.radius_range_pc.1)
                .max(f64::MIN_POSITIVE)
            + 100.0
    });
    let mut names: Vec<&'static str> = Vec::new();
    let mut priors = Vec::new();
    for &j in &sampled {
        let name = all_names[j];
        let v = theta_hat[j];
        let (low, high) = match name {
            "log_mbh" | "log_mc" => (v - 5.0, v + 5.0),
            "v_sys" => (v - 5_000.0, v + 5_000.0),
            "x_c" => (x_lo, x_hi),
            "s" => (0.0, 5_000.0),
            "upsilon" => (0.0, ups_hi),
            "gamma" => (0.0, CLUSTER_GAMMA_MAX),
            _ => (v - 10.0, v + 10.0),
        };
        names.push(name);
        priors.push(PriorBounds { name, low, high });
    }
    let incl_prior = match input.inclination {
        Inclination::Given { deg, err_deg } if err_deg > 0.0 => Some((deg, err_deg)),
        _ => None,
    };
    if incl_prior.is_some() {
        names.push("inclination_deg");
    }
    let mut start: Vec<f64> = sampled.iter().map(|&j| theta_hat[j]).collect();
    let mut scale: Vec<f64> = sampled
        .iter()
        .map(|&j| {
            let e = fit.params[j].2;
            if e.is_finite() && e > 0.0 {
                e
            } else {
                match all_names[j] {
                    "s" => {
                        0.1 * median(&input.points.iter().map(|p| p.err_km_s).collect::<Vec<_>>())
                    }
                    _ => 0.05 * theta_hat[j].abs().max(0.1),
                }
            }
        })
        .collect();
    if let Some((deg, err)) = incl_prior {
        start.push(deg);
        scale.push(err);
    }
    let n_model = sampled.len();
    let log_post = |u: &[f64]| {
        if !priors
            .iter()
            .zip(u)
            .all(|(p, v)| *v >= p.low && *v <= p.high)
        {
            return f64::NEG_INFINITY;
        }
        let mut theta = theta_hat.clone();
        for (k, &j) in sampled.iter().enumerate() {
            theta[j] = u[k];
        }
        let mut lp = 0.0;
        let mut local = model.clone();
        if let Some((deg, err)) = incl_prior {
            let i = u[n_model];
            if !(i > 0.0 && i < 180.0) {
                return f64::NEG_INFINITY;
            }
            let z = (i - deg) / err;
            lp -= 0.5 * z * z;
            local.sin_i = i.to_radians().sin();
        }
        lp - 0.5 * local.neg2(&theta)
    };
    let chain = ensemble::sample_with_scale(log_post, &start, &scale, &names, cfg)?;
    let params = (0..names.len())
        .map(|j| {
            ParamSummary::from_values(names[j], &mut chain.column(j)).ok_or_else(|| {
                FitError::InvalidSetting {
                    setting: "steps",
                    reason: "the posterior sample is empty or not finite".into(),
                }
            })
        })
        .collect::<Result<Vec<_>, _>>()?;
    let log_mbh = params[0].clone();
    Ok(DiskPosterior {
        model: fit.model,
        log_mbh,
        params,
        priors,
        inclination_prior: incl_prior,
        acceptance_fraction: chain.acceptance_fraction,
        autocorr_time: chain.autocorr_time,
        warning: chain.warning,
        n_samples: chain.samples.len(),
        config: cfg.clone(),
    })
}

/// A geometric distance from the drift of systemic maser features.
///
/// # Model
/// ```text
/// a = v_rot² / r  ⇒  r[pc] = v_rot² / (a / yr) · 10³ m km⁻¹ / pc      (v km/s, a km/s/yr)
/// D_k = r_k / θ_k (θ in radians);  σ_D/D = √((2σ_v/v)² + (σ_a/a)² + (σ_θ/θ)²)
/// D = Σ w_k D_k / Σ w_k,  w_k = 1/σ_D,k²,  σ_D = (Σ w_k)^(−1/2)
/// ```
/// (features on the near side of the disk, along the line of sight; common practice,
/// docs/methods.md §4.8).
///
/// # Errors
/// [`FitError::TooFewPoints`] for no features; [`FitError::NonFiniteInput`],
/// [`FitError::NegativeError`] and [`FitError::InvalidSetting`] naming the feature (0-based)
/// for a non-finite, negative or zero value.
///
/// # References
/// docs/methods.md §4.8.
pub fn maser_distance(features: &[MaserFeature]) -> Result<MaserDistance, FitError> {
    if features.is_empty() {
        return Err(FitError::TooFewPoints {
            n: 0,
            min: 1,
            method: "maser distance",
        });
    }
    let mut per = Vec::with_capacity(features.len());
    for (row, f) in features.iter().enumerate() {
        let cols = [
            (f.radius_mas, "radius_mas", true),
            (f.radius_err_mas, "radius_err_mas", false),
            (f.v_rot_km_s, "v_rot_km_s", true),
            (f.v_rot_err_km_s, "v_rot_err_km_s", false),
            (f.acceleration_km_s_yr, "acceleration_km_s_yr", true),
            (f.err, "acceleration_err_km_s_yr", true),
        ];
        for (v, column, strictly) in cols {
            if !v.is_finite() {
                return Err(FitError::NonFiniteInput { row, column });
            }
            if v < 0.0 {
                return Err(FitError::NegativeError { row, column });
            }
            if strictly && v == 0.0 {
                return Err(FitError::InvalidSetting {
                    setting: column,
                    reason: format!("feature {row} has {column} = 0; it must be above 0."),
                });
            }
        }
        let r_pc = maser_radius_pc(f.v_rot_km_s, f.acceleration_km_s_yr);
        let theta_rad = f.radius_mas / MAS_PER_RADIAN;
        let d_mpc = r_pc / theta_rad / 1.0e6;
        let rel = ((2.0 * f.v_rot_err_km_s / f.v_rot_km_s).powi(2)
            + (f.err / f.acceleration_km_s_yr).powi(2)
            + (f.radius_err_mas / f.radius_mas).powi(2))
        .sqrt();
        per.push((r_pc, d_mpc, rel * d_mpc));
    }
    let mut sw = Sum::default();
    let mut swd = Sum::default();
    for &(_, d, e) in &per {
        let w = 1.0 / (e * e);
        sw.add(w);
        swd.add(w * d);
    }
    let (sw, swd) = (sw.total(), swd.total());
    if !(sw.is_finite() && sw > 0.0) {
        return Err(FitError::InvalidSetting {
            setting: "acceleration_err_km_s_yr",
            reason: "every feature has an error of 0 on its distance, so they cannot be \
                     weighted."
                .to_owned(),
        });
    }
    let d = swd / sw;
    let chi2 = per.iter().map(|&(_, dk, e)| ((dk - d) / e).powi(2)).sum();
    Ok(MaserDistance {
        distance_mpc: d,
        err_mpc: sw.sqrt().recip(),
        per_feature: per,
        chi2,
    })
}

/// r = v² / a in pc for v in km/s and a in km/s/yr.
fn maser_radius_pc(v_km_s: f64, a_km_s_yr: f64) -> f64 {
    let r_km = v_km_s * v_km_s / (a_km_s_yr / JULIAN_YEAR_S);
    r_km * 1.0e3 / PARSEC_M
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::astro::constants;
    use crate::astro::kepler::{enclosed_mass_msun as kepler_enclosed, keplerian_mass_msun};
    use crate::fit::tolerance::close;

    #[track_caller]
    fn rel(actual: f64, expected: f64, tol: f64) {
        assert!(
            close(actual, expected, 0.0, tol),
            "got {actual}, expected {expected} within a relative {tol}"
        );
    }

    /// An invented disk: `n` points from −1 to +1 pc (skipping the centre) from the given
    /// model, no noise, errors `err` km/s.
    fn disk(n: usize, log_m: f64, v_sys: f64, x_c: f64, sin_i: f64, err: f64) -> Vec<DiskPoint> {
        (0..n)
            .map(|k| {
                let t = -1.0 + 2.0 * (k as f64 + 0.5) / n as f64;
                let x = x_c + t.signum() * (0.08 + 0.92 * t.abs());
                let r = (x - x_c).abs();
                let v = v_sys
                    + (x - x_c).signum()
                        * sin_i
                        * (G_PC_KM2_S2_PER_MSUN * 10f64.powf(log_m) / r).sqrt();
                DiskPoint {
                    offset_pc: x,
                    v_km_s: v,
                    err_km_s: err,
                }
            })
            .collect()
    }

    fn input(points: Vec<DiskPoint>, inclination: Inclination) -> DiskInput {
        DiskInput {
            points,
            distance_mpc: 10.0,
            distance_err_mpc: 0.0,
            inclination,
        }
    }

    #[test]
    fn constants_are_the_astro_ones_to_the_last_bit() {
        assert_eq!(
            G_PC_KM2_S2_PER_MSUN.to_bits(),
            constants::G_PC_KM2_S2_PER_MSUN.to_bits()
        );
        assert_eq!(PARSEC_M.to_bits(), constants::PARSEC_M.to_bits());
        assert_eq!(JULIAN_YEAR_S.to_bits(), constants::JULIAN_YEAR_S.to_bits());
        assert_eq!(
            MAS_PER_RADIAN.to_bits(),
            (1000.0 * constants::ARCSEC_PER_RADIAN).to_bits()
        );
    }

    #[test]
    fn circular_speed_and_enclosed_mass_agree_with_the_kepler_module() {
        // The model's speed at r, turned back into a mass by astro::kepler, is the model's mass
        // (docs/methods.md §4.6), with and without stars and a cluster, at several inclinations.
        let pts = disk(6, 7.3, 0.0, 0.0, 1.0, 5.0);
        let plummer = LightProfile::Plummer {
            l_total_lsun: 3e7,
            a_pc: 0.7,
        };
        for (stars, cluster, theta) in [
            (None, None, vec![7.3, 0.0, 0.0, 0.0]),
            (Some((&plummer, None)), None, vec![7.3, 0.0, 0.0, 0.0, 2.5]),
            (
                Some((&plummer, Some(1.7))),
                Some(0.5),
                vec![7.3, 0.0, 0.0, 0.0, 6.4, 1.2],
            ),
        ] {
            for deg in [90.0_f64, 60.0, 25.0] {
                let sin_i = deg.to_radians().sin();
                let m = Model {
                    points: &pts,
                    sin_i,
                    sense: 1.0,
                    stars,
                    cluster_rc: cluster,
                    hold_centre: false,
                };
                for r in [0.05, 0.3, 1.0, 4.0] {
                    let v_obs = m.velocity(&theta, r);
                    let mass = m.enclosed_with(&m.terms(&theta), r);
                    rel(kepler_enclosed(v_obs, deg, r).unwrap(), mass, 1e-12);
                    rel(keplerian_mass_msun(v_obs / sin_i, r).unwrap(), mass, 1e-12);
                }
            }
        }
    }

    #[test]
    fn check_values_of_the_keplerian_mass() {
        // 1000 km/s at 0.1 pc encloses v² r / G = 2.325085e7 M☉ (computed, G = 4.30091727e-3).
        let pts = disk(4, 7.0, 0.0, 0.0, 1.0, 1.0);
        let m = Model {
            points: &pts,
            sin_i: 1.0,
            sense: 1.0,
            stars: None,
            cluster_rc: None,
            hold_centre: false,
        };
        let theta = [2.325_085_411e7_f64.log10(), 0.0, 0.0, 0.0];
        rel(m.velocity(&theta, 0.1), 1000.0, 1e-9);
        // Common practice: gas at about 800 km/s some 60 light-years from a nucleus means about
        // 3e9 M☉ (rule of thumb; the exact value is 2.737e9, computed, within 10 %).
        let r = 60.0 / constants::LIGHT_YEARS_PER_PARSEC;
        let theta = [3.0e9_f64.log10(), 0.0, 0.0, 0.0];
        let v = m.velocity(&theta, r);
        rel(v, 800.0, 0.05);
        rel(800.0 * 800.0 * r / G_PC_KM2_S2_PER_MSUN, 3.0e9, 0.1);
    }

    #[test]
    fn a_noiseless_disk_is_recovered() {
        // Invented disk: M = 10^7.4 M☉, v_sys = 1234 km/s, centre 0.013 pc off the member's,
        // i = 70°, receding side at negative offsets.
        let sin_i = 70f64.to_radians().sin();
        let mut pts = disk(24, 7.4, 1234.0, 0.013, sin_i, 2.0);
        for p in &mut pts {
            p.v_km_s = 2.0 * 1234.0 - p.v_km_s;
        }
        let f = fit_point_mass(&input(
            pts,
            Inclination::Given {
                deg: 70.0,
                err_deg: 0.0,
            },
        ))
        .expect("fit");
        assert!((f.log_mbh - 7.4).abs() < 1e-6, "{}", f.log_mbh);
        assert!((f.v_sys_km_s.0 - 1234.0).abs() < 1e-4, "{:?}", f.v_sys_km_s);
        assert!((f.centre_pc.0 - 0.013).abs() < 1e-6, "{:?}", f.centre_pc);
        assert_eq!(f.scatter_km_s, (0.0, 0.0));
        assert!(close(f.rotation_sense, -1.0, 0.0, 0.0));
        assert!(!f.centre_held && !f.mass_is_m_sin2i);
        assert!(f.residuals.iter().all(|r| r.abs() < 1e-4));
        assert_eq!(f.n_params, 4);
        assert!(f.log_mbh_err_stat > 0.0 && f.log_mbh_err_stat < 0.01);
        // AIC and BIC from −2 ln L (4 parameters, 24 points).
        let neg2 = -2.0 * f.max_log_likelihood;
        rel(f.aic, neg2 + 8.0, 1e-12);
        rel(f.bic, neg2 + 4.0 * 24f64.ln(), 1e-12);
    }

    #[test]
    fn an_unknown_inclination_gives_m_sin2_i() {
        // The same velocities fitted at i = 30° and with i unknown differ by −2 log sin 30° =
        // 0.60206 dex (computed).
        let pts = disk(16, 7.0, 500.0, 0.0, 0.5, 3.0);
        let given = fit_point_mass(&input(
            pts.clone(),
            Inclination::Given {
                deg: 30.0,
                err_deg: 2.0,
            },
        ))
        .expect("given");
        let unknown = fit_point_mass(&input(pts, Inclination::Unknown)).expect("unknown");
        assert!(unknown.mass_is_m_sin2i && !given.mass_is_m_sin2i);
        assert!((given.log_mbh - 7.0).abs() < 1e-6);
        assert!((given.log_mbh - unknown.log_mbh - 0.602_06).abs() < 1e-5);
        assert!(close(unknown.log_mbh_err_inclination, 0.0, 0.0, 0.0));
        // 2 |cot 30°| (2° in rad) / ln 10 = 0.0525149 dex (computed).
        assert!((given.log_mbh_err_inclination - 0.052_514_9).abs() < 1e-6);
    }

    #[test]
    fn inclination_and_distance_errors_are_reported_and_combined() {
        // i = 60 ± 5°: 2 cot 60° (5° in rad) / ln 10 = 0.043762 dex; D = 18 ± 1.8 Mpc:
        // 0.1 / ln 10 = 0.043429 dex (both computed; docs/methods.md §3.2).
        let mut inp = input(
            disk(12, 8.0, 0.0, 0.0, 60f64.to_radians().sin(), 10.0),
            Inclination::Given {
                deg: 60.0,
                err_deg: 5.0,
            },
        );
        inp.distance_mpc = 18.0;
        inp.distance_err_mpc = 1.8;
        let f = fit_point_mass(&inp).expect("fit");
        assert!((f.log_mbh_err_inclination - 0.043_762).abs() < 1e-6);
        assert!((f.log_mbh_err_distance - 0.043_429).abs() < 1e-6);
        let total = (f.log_mbh_err_stat.powi(2)
            + f.log_mbh_err_inclination.powi(2)
            + f.log_mbh_err_distance.powi(2))
        .sqrt();
        rel(f.log_mbh_err_total, total, 1e-12);
    }

    #[test]
    fn a_one_sided_disk_holds_the_centre() {
        let pts: Vec<DiskPoint> = disk(20, 7.5, 300.0, 0.0, 1.0, 5.0)
            .into_iter()
            .filter(|p| p.offset_pc > 0.0)
            .collect();
        let f = fit_point_mass(&input(pts, Inclination::Unknown)).expect("fit");
        assert!(f.centre_held);
        assert_eq!(f.centre_pc, (0.0, 0.0));
        assert_eq!(f.n_params, 3);
        assert!((f.log_mbh - 7.5).abs() < 1e-6, "{}", f.log_mbh);
        // v_sys is poorly fixed from one side: its error is larger than from both sides.
        let both = fit_point_mass(&input(
            disk(20, 7.5, 300.0, 0.0, 1.0, 5.0),
            Inclination::Unknown,
        ))
        .expect("both");
        assert!(f.v_sys_km_s.1 > both.v_sys_km_s.1);
    }

    #[test]
    fn row_order_does_not_change_the_fit() {
        let mut pts = disk(15, 7.2, 100.0, 0.02, 1.0, 8.0);
        for (k, p) in pts.iter_mut().enumerate() {
            p.v_km_s += if k % 3 == 0 { 9.0 } else { -4.5 };
        }
        let a = fit_point_mass(&input(pts.clone(), Inclination::Unknown)).expect("a");
        pts.reverse();
        pts.rotate_left(4);
        let b = fit_point_mass(&input(pts, Inclination::Unknown)).expect("b");
        assert!((a.log_mbh - b.log_mbh).abs() < 1e-8);
        assert!((a.log_mbh_err_stat - b.log_mbh_err_stat).abs() < 1e-6);
    }

    #[test]
    fn stars_are_found_and_preferred_when_they_dominate_outside() {
        // Invented: M_BH = 10^7 M☉, Plummer stars L = 10^7.5 L☉, a = 1 pc, Υ = 3: the stars
        // inside 2 pc (Υ L(<2) = 6.8e7 M☉, computed) outweigh the black hole.
        let plummer = LightProfile::Plummer {
            l_total_lsun: 10f64.powf(7.5),
            a_pc: 1.0,
        };
        let ext = Extended {
            stars: Some((plummer.clone(), MassToLight::Free)),
            cluster: None,
        };
        let pts: Vec<DiskPoint> = (0..30)
            .map(|k| {
                let t = -1.0 + 2.0 * (f64::from(k) + 0.5) / 30.0;
                let x = t.signum() * (0.05 + 1.95 * t.abs());
                let m = 1e7 + 3.0 * plummer.enclosed_lsun(x.abs());
                DiskPoint {
                    offset_pc: x,
                    v_km_s: 700.0 + x.signum() * (G_PC_KM2_S2_PER_MSUN * m / x.abs()).sqrt(),
                    err_km_s: 5.0,
                }
            })
            .collect();
        let inp = input(pts, Inclination::Unknown);
        let point = fit_point_mass(&inp).expect("point");
        let stars = fit_extended(&inp, &ext).expect("stars");
        assert_eq!(stars.model, "point mass + stars");
        assert!((stars.log_mbh - 7.0).abs() < 1e-5, "{}", stars.log_mbh);
        let (u, ue) = stars.upsilon.expect("upsilon");
        assert!((u - 3.0).abs() < 1e-4 && ue > 0.0, "{u} ± {ue}");
        let c = compare(&point, &stars);
        assert_eq!(c.preferred, "point mass + stars");
        assert_eq!(c.df, 1);
        assert!(c.delta_bic < 0.0 && c.p_value.is_some_and(|p| p < 1e-6));
        assert!(c.sentence.ends_with('.'));
        // The point mass fitted to stars-and-hole data has a flatter slope than −1/2.
        let slope = velocity_slope(&inp, &point).expect("slope");
        assert!(slope.slope > -0.45, "{slope:?}");
        let slope = velocity_slope(&inp, &stars).expect("slope");
        assert!(slope.z > 2.0, "{slope:?}");
        // The chart curve goes through the data.
        for p in &inp.points {
            let v = model_velocity(&stars, Some(&ext), p.offset_pc).expect("v");
            assert!((v - p.v_km_s).abs() < 1e-3);
        }
        assert!(model_velocity(&stars, Some(&ext), stars.centre_pc.0).is_none());
    }

    #[test]
    fn a_keplerian_disk_has_slope_minus_one_half() {
        let pts = disk(20, 7.0, 0.0, 0.0, 1.0, 1.0);
        let inp = input(pts, Inclination::Unknown);
        let f = fit_point_mass(&inp).expect("fit");
        let s = velocity_slope(&inp, &f).expect("slope");
        assert!((s.slope + 0.5).abs() < 1e-6, "{s:?}");
        assert_eq!(s.n_used, 20);
    }

    #[test]
    fn a_cluster_fit_runs_and_nests_the_point_mass() {
        let pts = disk(20, 7.0, 0.0, 0.0, 1.0, 5.0);
        let inp = input(pts, Inclination::Unknown);
        let point = fit_point_mass(&inp).expect("point");
        let ext = Extended {
            stars: None,
            cluster: Some(ClusterSpec { r_c_pc: 1.0 }),
        };
        let cl = fit_extended(&inp, &ext).expect("cluster");
        assert_eq!(cl.model, "point mass + cluster");
        assert_eq!(cl.n_params, 6);
        let c = cl.cluster.as_ref().expect("cluster");
        // No cluster in the data: either held as unconstrained or consistent with nothing.
        assert!(!c.constrained || 10f64.powf(c.log_mc.0) < 0.05 * 10f64.powf(cl.log_mbh));
        assert!((cl.log_mbh - 7.0).abs() < 1e-3, "{}", cl.log_mbh);
        // The extended model nests the point mass: its likelihood is at least as high.
        assert!(cl.max_log_likelihood >= point.max_log_likelihood - 1e-6);
        assert_eq!(compare(&point, &cl).preferred, "point mass");
    }

    #[test]
    fn light_profiles_and_their_checks() {
        // Plummer at r = a holds L/2^{3/2} = 0.353553 L (computed).
        let p = LightProfile::Plummer {
            l_total_lsun: 1e8,
            a_pc: 2.0,
        };
        rel(p.enclosed_lsun(2.0), 1e8 / 8f64.sqrt(), 1e-14);
        let pl = LightProfile::PowerLaw {
            l_ref_lsun: 1e6,
            r_ref_pc: 1.0,
            slope: 1.5,
        };
        rel(pl.enclosed_lsun(4.0), 8e6, 1e-14);
        let t = LightProfile::Table(vec![(1.0, 1e6), (2.0, 4e6), (4.0, 8e6)]);
        t.check().expect("table");
        rel(t.enclosed_lsun(2.0), 4e6, 1e-14);
        // Between the nodes, a power law (slope 2 on the first segment): 1e6 · 1.5² = 2.25e6.
        rel(t.enclosed_lsun(1.5), 2.25e6, 1e-12);
        // Beyond the ends, the end segments' power laws: slope 2 inside, 1 outside.
        rel(t.enclosed_lsun(0.5), 2.5e5, 1e-12);
        rel(t.enclosed_lsun(8.0), 1.6e7, 1e-12);
        assert!(close(t.enclosed_lsun(0.0), 0.0, 0.0, 0.0));
        for bad in [
            LightProfile::Table(vec![(1.0, 1e6)]),
            LightProfile::Table(vec![(2.0, 1e6), (1.0, 2e6)]),
            LightProfile::Table(vec![(1.0, 2e6), (2.0, 1e6)]),
            LightProfile::Table(vec![(1.0, f64::NAN), (2.0, 1e6)]),
            LightProfile::Plummer {
                l_total_lsun: 0.0,
                a_pc: 1.0,
            },
            LightProfile::PowerLaw {
                l_ref_lsun: 1.0,
                r_ref_pc: 1.0,
                slope: 3.5,
            },
        ] {
            assert!(
                matches!(
                    bad.check(),
                    Err(FitError::InvalidSetting {
                        setting: "light_profile",
                        ..
                    })
                ),
                "{bad:?}"
            );
        }
    }

    #[test]
    fn every_input_fault_names_its_row() {
        let good = disk(10, 7.0, 0.0, 0.0, 1.0, 5.0);
        let fit = |pts: Vec<DiskPoint>| fit_point_mass(&input(pts, Inclination::Unknown));
        let mut bad = good.clone();
        bad[3].v_km_s = f64::NAN;
        assert_eq!(
            fit(bad),
            Err(FitError::NonFiniteInput {
                row: 3,
                column: "v_km_s"
            })
        );
        let mut bad = good.clone();
        bad[6].err_km_s = -1.0;
        assert_eq!(
            fit(bad),
            Err(FitError::NegativeError {
                row: 6,
                column: "err_km_s"
            })
        );
        let mut bad = good.clone();
        bad[2].err_km_s = 0.0;
        let e = fit(bad).expect_err("zero error");
        assert!(e.to_string().contains("row 2"), "{e}");
        assert_eq!(
            fit(vec![
                good[0].clone(),
                good[1].clone(),
                good[8].clone(),
                good[9].clone()
            ]),
            Err(FitError::TooFewPoints {
                n: 4,
                min: 5,
                method: "disk"
            })
        );
        let same: Vec<DiskPoint> = good
            .iter()
            .enumerate()
            .map(|(k, p)| DiskPoint {
                offset_pc: if k % 2 == 0 { 0.5 } else { -0.5 },
                ..p.clone()
            })
            .collect();
        assert!(matches!(
            fit(same),
            Err(FitError::InvalidSetting {
                setting: "offset_pc",
                ..
            })
        ));
        let mut inp = input(
            good.clone(),
            Inclination::Given {
                deg: 0.0,
                err_deg: 1.0,
            },
        );
        assert!(matches!(
            fit_point_mass(&inp),
            Err(FitError::InvalidSetting {
                setting: "inclination_deg",
                ..
            })
        ));
        inp.inclination = Inclination::Unknown;
        inp.distance_mpc = -3.0;
        assert!(matches!(
            fit_point_mass(&inp),
            Err(FitError::InvalidSetting {
                setting: "distance_mpc",
                ..
            })
        ));
        let ext = Extended {
            stars: Some((
                LightProfile::Plummer {
                    l_total_lsun: 1e7,
                    a_pc: 1.0,
                },
                MassToLight::Fixed(-1.0),
            )),
            cluster: None,
        };
        assert!(matches!(
            fit_extended(&input(good, Inclination::Unknown), &ext),
            Err(FitError::InvalidSetting {
                setting: "mass_to_light",
                ..
            })
        ));
    }

    #[test]
    fn minimum_density_check_value() {
        // 10⁷ M☉ inside 0.1 pc: 10⁷ / (4/3 π 10⁻³) = 2.387324e9 M☉ pc⁻³ (computed).
        rel(minimum_density(1e7, 0.1).unwrap(), 2.387_324_146e9, 1e-9);
        assert!(minimum_density(0.0, 0.1).is_err());
        assert!(minimum_density(1e7, f64::NAN).is_err());
    }

    #[test]
    fn maser_distance_check_value() {
        // v_rot = 1000 km/s, a = 10 km/s/yr: r = v²/a = 3.15576e12 km = 0.10227122 pc; at
        // θ = 3 mas that is D = 0.10227122 pc / 1.4544410e-8 rad = 7.0316509 Mpc (computed).
        let f = MaserFeature {
            radius_mas: 3.0,
            radius_err_mas: 0.03,
            v_rot_km_s: 1000.0,
            v_rot_err_km_s: 5.0,
            acceleration_km_s_yr: 10.0,
            err: 0.5,
        };
        let d = maser_distance(std::slice::from_ref(&f)).expect("distance");
        rel(d.per_feature[0].0, 0.102_271_216_5, 1e-9);
        rel(d.distance_mpc, 7.031_650_886, 1e-9);
        // σ_D/D = √(0.01² + 0.05² + 0.01²) = 0.0519615 (computed).
        rel(d.err_mpc, 7.031_650_886 * 0.051_961_524, 1e-7);
        assert!(close(d.chi2, 0.0, 0.0, 0.0));
        // Two features: the weighted mean lies between them.
        let g = MaserFeature {
            acceleration_km_s_yr: 11.0,
            ..f.clone()
        };
        let d2 = maser_distance(&[f.clone(), g]).expect("two");
        assert!(d2.distance_mpc < 7.031_650_886 && d2.distance_mpc > 7.031_650_886 / 1.1);
        assert!(d2.chi2 > 0.0);
        let bad = MaserFeature {
            err: 0.0,
            ..f.clone()
        };
        assert!(matches!(
            maser_distance(&[f, bad]),
            Err(FitError::InvalidSetting { .. })
        ));
        assert!(maser_distance(&[]).is_err());
    }

    #[test]
    fn the_posterior_agrees_with_the_curvature_on_a_gaussian_case() {
        let mut pts = disk(30, 7.0, 0.0, 0.0, 1.0, 20.0);
        for (k, p) in pts.iter_mut().enumerate() {
            p.v_km_s += 20.0 * ((k * 7 % 11) as f64 / 5.0 - 1.0);
        }
        let inp = input(
            pts,
            Inclination::Given {
                deg: 75.0,
                err_deg: 3.0,
            },
        );
        let f = fit_point_mass(&inp).expect("fit");
        let cfg = EnsembleConfig {
            walkers: 16,
            steps: 1_500,
            burn_in: 300,
            seed: 7,
            init_scatter: 0.1,
        };
        let p = posterior_with(&inp, &f, None, &cfg).expect("posterior");
        assert_eq!(p.params.last().map(|s| s.name), Some("inclination_deg"));
        let sigma = f.log_mbh_err_stat.hypot(f.log_mbh_err_inclination);
        let half = 0.5 * (p.log_mbh.p84 - p.log_mbh.p16);
        assert!((p.log_mbh.median - f.log_mbh).abs() < 0.25 * sigma, "{p:?}");
        assert!((half / sigma - 1.0).abs() < 0.25, "{half} vs {sigma}");
    }
}
