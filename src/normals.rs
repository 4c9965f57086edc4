//! Published normal ranges of adult LV volumes and function by CMR, quoted in outputs for
//! context only: the tool judges agreement between reconstructions, not health.

use serde::{Deserialize, Serialize};

/// Where the values come from (looked up, not recalled).
pub const SOURCE: &str = "Kawel-Boehm N, et al. Normal values for cardiovascular magnetic \
resonance in adults and children. J Cardiovasc Magn Reson 2015;17:29 (adults, 1.5 T bSSFP short \
axis), as tabulated in Cardiovasc Diagn Ther 2020;10(6):1918-1945, Table 3";

/// The source's blood-pool convention, which differs from this tool's default.
pub const SOURCE_CONVENTION: &str =
    "papillary muscles and trabeculae counted in LV mass, i.e. left out of the volumes";

/// One quantity's normal range for one sex: mean ± SD, limits mean ± 2 SD.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NormalRange {
    /// `edv_ml`, `esv_ml`, `sv_ml` or `ef_pct` (the result keys).
    pub quantity: String,
    /// `male` or `female`.
    pub sex: String,
    /// Mean.
    pub mean: f64,
    /// Standard deviation.
    pub sd: f64,
    /// Mean − 2 SD.
    pub lower: f64,
    /// Mean + 2 SD.
    pub upper: f64,
}

/// The ranges with their source, as written into results.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NormalRanges {
    /// Citation.
    pub source: String,
    /// The source's blood-pool convention.
    pub source_convention: String,
    /// What the ranges are for.
    pub note: String,
    /// The ranges.
    pub ranges: Vec<NormalRange>,
}

/// (quantity, male mean, male SD, female mean, female SD) from [`SOURCE`].
const TABLE: [(&str, f64, f64, f64, f64); 4] = [
    ("edv_ml", 160.0, 27.0, 132.0, 23.0),
    ("esv_ml", 54.0, 14.0, 44.0, 11.0),
    ("sv_ml", 108.0, 18.0, 87.0, 15.0),
    ("ef_pct", 67.0, 5.0, 67.0, 5.0),
];

/// The published adult ranges, sex-specific.
pub fn adult_lv() -> NormalRanges {
    let range = |quantity: &str, sex: &str, mean: f64, sd: f64| NormalRange {
        quantity: quantity.into(),
        sex: sex.into(),
        mean,
        sd,
        lower: mean - 2.0 * sd,
        upper: mean + 2.0 * sd,
    };
    NormalRanges {
        source: SOURCE.into(),
        source_convention: SOURCE_CONVENTION.into(),
        note: "context only: normal ranges describe healthy adults, not the agreement between \
               reconstructions that this tool measures; not for diagnostic use"
            .into(),
        ranges: TABLE
            .iter()
            .flat_map(|&(q, mm, ms, fm, fs)| [range(q, "male", mm, ms), range(q, "female", fm, fs)])
            .collect(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// SV = EDV − ESV holds for the source's means (160 − 54 = 106 ≈ 108; 132 − 44 = 88 ≈ 87):
    /// a check that the table was copied right, within the rounding of means taken from different
    /// subjects (a few ml).
    #[test]
    fn the_table_is_consistent_and_limits_are_two_sd() {
        let r = adult_lv();
        let get = |q: &str, s: &str| {
            r.ranges
                .iter()
                .find(|x| x.quantity == q && x.sex == s)
                .expect("present")
                .clone()
        };
        for sex in ["male", "female"] {
            let (edv, esv, sv) = (get("edv_ml", sex), get("esv_ml", sex), get("sv_ml", sex));
            assert!((edv.mean - esv.mean - sv.mean).abs() <= 3.0, "{sex}");
            let ef = get("ef_pct", sex);
            assert!((100.0 * sv.mean / edv.mean - ef.mean).abs() <= 2.0, "{sex}");
            assert_eq!(edv.lower, edv.mean - 2.0 * edv.sd);
        }
        assert_eq!(r.ranges.len(), 8);
    }
}
