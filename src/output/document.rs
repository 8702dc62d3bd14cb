//! The header every JSON document starts with: tool version, input, seed and every engine
//! setting, so that a result can be reproduced.

use crate::cluster::EngineOptions;
use serde::{Deserialize, Serialize};

/// Written at the top level of every document (flattened): `tool_version`, `input`,
/// `seed` and `engine`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DocumentHeader {
    /// The version of the tool that wrote the document.
    pub tool_version: String,
    /// Input file name, when there was one.
    #[serde(default)]
    pub input: Option<String>,
    /// The seed of every random choice (the engine's seed).
    pub seed: u64,
    /// Every engine setting used (absent in documents written before it was recorded).
    #[serde(default)]
    pub engine: EngineOptions,
}

impl DocumentHeader {
    /// The header of a document written now with these engine settings.
    pub fn new(input: Option<String>, engine: EngineOptions) -> Self {
        DocumentHeader {
            tool_version: crate::TOOL_VERSION.to_string(),
            input,
            seed: engine.seed,
            engine,
        }
    }
}
