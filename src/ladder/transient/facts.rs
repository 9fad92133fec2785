//! What is known of one supernova before the chase: its class, its bands,
//! its role (Hubble flow, calibrator or unanchored), and where its light
//! curve is placed.

use super::standardize::Role;
use super::template::CurveParams;
use serde::Serialize;

/// What is known of a supernova's class.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "status", content = "class", rename_all = "snake_case")]
pub enum ClassStatus {
    /// Not yet classified.
    Candidate,
    /// Classified as a thermonuclear supernova (the class as given).
    Thermonuclear(String),
    /// Classified as something else.
    Other(String),
}

impl ClassStatus {
    /// From a class as written: empty, `candidate` or `unclassified` is a
    /// candidate; `Ia` (any case, or `Ia-norm`) a thermonuclear supernova;
    /// anything else another class (peculiar subclasses such as `Ia-91bg`
    /// or `Iax` follow no standardization).
    pub fn parse(s: Option<&str>) -> ClassStatus {
        let t = s.map(str::trim).unwrap_or("");
        match t.to_ascii_lowercase().as_str() {
            "" | "candidate" | "unclassified" => ClassStatus::Candidate,
            "ia" | "ia-norm" | "ia-normal" => ClassStatus::Thermonuclear(t.to_string()),
            _ => ClassStatus::Other(t.to_string()),
        }
    }
    /// The status in words: `candidate` or the class.
    pub fn label(&self) -> String {
        match self {
            ClassStatus::Candidate => "candidate".into(),
            ClassStatus::Thermonuclear(c) | ClassStatus::Other(c) => c.clone(),
        }
    }
}

/// What the target and the options say about one supernova.
#[derive(Debug, Clone, PartialEq)]
pub struct Facts {
    /// Bands of the chase, B first.
    pub bands: Vec<String>,
    /// Its class.
    pub status: ClassStatus,
    /// Hubble flow, calibrator or unanchored.
    pub role: Role,
    /// Redshift, when known and positive.
    pub z: Option<f64>,
}

impl Facts {
    /// Whether the chase must plan a classification spectrum.
    pub fn needs_classification(&self) -> bool {
        self.status == ClassStatus::Candidate
    }
}

/// How the template was placed on the sky.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Placement {
    /// The parameters.
    pub params: CurveParams,
    /// Redshift used for time dilation (0 when unknown).
    pub z: f64,
    /// B peak expected from the distance (flat ΛCDM at the redshift, or the
    /// host's distance) and the standardization, when one is known, mag.
    pub hubble_peak_mag: Option<f64>,
    /// How the peak and its time were found, for the observer.
    pub how: String,
}
