//! Full citations of the methods a report may rely on, for the provenance section.
//!
//! Owns: the citation texts (from damage-relations.md §10 and insar-methods.md §10) and the
//! choice of which to print for which method. Does not own: deciding which methods a run used
//! (the adapter passes them).
//!
//! Provenance is kept as in the notes: damage-relations.md states that page ranges and volume
//! details are from memory, so those citations carry "[details from memory]"; the InSAR
//! citations keep their status tags where the note marks them \[M\] (from memory).

/// A method whose reference can be printed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Method {
    /// Definitions of settlement, tilt, angular distortion, deflection ratio; deep beam.
    BurlandWroth1974,
    /// Damage category table (ease of repair).
    BurlandEtAl1977,
    /// Limiting tensile strains and β–ε_h chart.
    BoscardinCording1989,
    /// Δ/L–ε_h interaction chart.
    Burland1995,
    /// Staged assessment and the strain superposition used with the chart.
    MairTaylorBurland1996,
    /// Principal strain from angular distortion and lateral strain.
    SonCording2005,
    /// Angular distortion limits 1/300, 1/150.
    SkemptonMacDonald1956,
    /// Angular distortion ladder, 1/500.
    Bjerrum1963,
    /// Deep-beam theory used in the derivations.
    Timoshenko1955,
    /// Modified z-score outlier rule.
    IglewiczHoaglin1993,
    /// Theil–Sen robust slope.
    TheilSen,
    /// Huber robust regression.
    Huber1964,
    /// InSAR geometry and 3-D displacement from several geometries.
    BrouwerHanssen2023,
    /// Thermal expansion component of PSI observations.
    Monserrat2011,
    /// Breakpoint regression.
    Muggeo2003,
    /// Serial correlation and effective sample size.
    ZwiersVonStorch1995,
}

impl Method {
    /// The citation as printed in reports.
    pub fn citation(self) -> &'static str {
        match self {
            Self::BurlandWroth1974 => {
                "Burland, J.B. & Wroth, C.P. (1974). Settlement of buildings and associated damage. Proc. Conf. Settlement of Structures, Cambridge. Pentech Press, London, 611–654. [details from memory]"
            }
            Self::BurlandEtAl1977 => {
                "Burland, J.B., Broms, B.B. & de Mello, V.F.B. (1977). Behaviour of foundations and structures. State-of-the-art report, Proc. 9th Int. Conf. Soil Mechanics and Foundation Engineering, Tokyo, Vol. 2, 495–546. [details from memory]"
            }
            Self::BoscardinCording1989 => {
                "Boscardin, M.D. & Cording, E.J. (1989). Building response to excavation-induced settlement. J. Geotechnical Engineering, ASCE, 115(1), 1–21. [details from memory]"
            }
            Self::Burland1995 => {
                "Burland, J.B. (1995). Assessment of risk of damage to buildings due to tunnelling and excavation. Invited special lecture, Proc. 1st Int. Conf. Earthquake Geotechnical Engineering (IS-Tokyo '95), Balkema. [details from memory]"
            }
            Self::MairTaylorBurland1996 => {
                "Mair, R.J., Taylor, R.N. & Burland, J.B. (1996). Prediction of ground movements and assessment of risk of building damage due to bored tunnelling. Geotechnical Aspects of Underground Construction in Soft Ground (Mair & Taylor, eds), Balkema, Rotterdam. [details from memory]"
            }
            Self::SonCording2005 => {
                "Son, M. & Cording, E.J. (2005). Estimation of building damage due to excavation-induced ground movements. J. Geotechnical and Geoenvironmental Engineering, ASCE, 131(2), 162–177. [details from memory]"
            }
            Self::SkemptonMacDonald1956 => {
                "Skempton, A.W. & MacDonald, D.H. (1956). The allowable settlements of buildings. Proc. ICE, Part III, 5, 727–768. [details from memory]"
            }
            Self::Bjerrum1963 => {
                "Bjerrum, L. (1963). Allowable settlement of structures. Proc. 3rd European Conf. Soil Mechanics and Foundation Engineering, Wiesbaden, Vol. 2 (discussion contribution). [details from memory]"
            }
            Self::Timoshenko1955 => {
                "Timoshenko, S.P. (1955/1957). Strength of Materials, Part I. Van Nostrand. [details from memory]"
            }
            Self::IglewiczHoaglin1993 => {
                "Iglewicz, B. & Hoaglin, D.C. (1993). How to Detect and Handle Outliers. ASQC. [from memory]"
            }
            Self::TheilSen => {
                "Theil, H. (1950). Proc. KNAW 53; Sen, P.K. (1968). Estimates of the regression coefficient based on Kendall's tau. JASA 63, 1379–1389. [from memory]"
            }
            Self::Huber1964 => {
                "Huber, P.J. (1964). Robust estimation of a location parameter. Ann. Math. Stat. 35, 73–101. [from memory]"
            }
            Self::BrouwerHanssen2023 => {
                "Brouwer, W.S. & Hanssen, R.F. (2023). A treatise on InSAR geometry and 3D displacement estimation. IEEE TGRS, doi 10.1109/TGRS.2023.3322595."
            }
            Self::Monserrat2011 => {
                "Monserrat, O., Crosetto, M., Cuevas, M. & Crippa, B. (2011). The thermal expansion component of persistent scatterer interferometry observations. IEEE GRSL 8(5), 864–868. [from memory]"
            }
            Self::Muggeo2003 => {
                "Muggeo, V.M.R. (2003). Estimating regression models with unknown break-points. Statistics in Medicine 22, 3055–3071. [details from memory]"
            }
            Self::ZwiersVonStorch1995 => {
                "Zwiers, F.W. & von Storch, H. (1995). Taking serial correlation into account in tests of the mean. J. Climate 8, 336–351. [details from memory]"
            }
        }
    }
}

/// Citations for `methods`, deduplicated, in the enum's order (stable across runs).
pub fn citations(methods: &[Method]) -> Vec<String> {
    let mut m = methods.to_vec();
    m.sort();
    m.dedup();
    m.into_iter().map(|x| x.citation().to_string()).collect()
}

/// The methods every damage-screening report uses (definitions, categories, chart).
pub const CORE_METHODS: &[Method] = &[
    Method::BurlandWroth1974,
    Method::BurlandEtAl1977,
    Method::BoscardinCording1989,
    Method::Burland1995,
    Method::MairTaylorBurland1996,
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn citations_are_sorted_unique_and_keep_memory_marks() {
        let c = citations(&[
            Method::Burland1995,
            Method::BurlandWroth1974,
            Method::Burland1995,
        ]);
        assert_eq!(c.len(), 2);
        assert!(c[0].starts_with("Burland, J.B. & Wroth"));
        assert!(c.iter().all(|s| s.contains("from memory")));
    }
}
