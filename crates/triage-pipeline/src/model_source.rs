//! The model a run uses: a file named by the user, or the one built into this library.

use std::path::Path;

use anyhow::Context;
use verdict_model::ModelBundle;

/// The shipped model (trained by `ccm-triage train training-sim/specs/default.toml`).
pub const BUILT_IN: &[u8] = include_bytes!(concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/../../models/default-model.bin"
));

/// A loaded model and how to name it in outputs.
pub struct LoadedModel {
    /// The model.
    pub bundle: ModelBundle,
    /// `built-in` or the path given.
    pub source: String,
    /// SHA-256 of the model file's bytes.
    pub sha256: String,
}

impl LoadedModel {
    /// One line naming the model, for reports and logs.
    pub fn identity_line(&self) -> String {
        format!(
            "{} (trained on spec `{}`, sha256 {})",
            self.source,
            self.bundle.spec.name,
            &self.sha256[..16]
        )
    }
}

/// Load `path`, or the built-in model when `None`; the model must match this build's features.
pub fn load(path: Option<&Path>) -> anyhow::Result<LoadedModel> {
    let schema = ensemble_features::schema_hash();
    let source = match path {
        Some(p) => p.display().to_string(),
        None => "built-in model".to_string(),
    };
    let context = || {
        format!(
            "model {source} cannot be used; train one with `ccm-triage train SPEC.toml --out DIR` \
             or omit --model to use the built-in model"
        )
    };
    // A file's type and size are checked before it is read (a device or a huge file is
    // refused at once); the bundle is checked against its own sizes on decoding.
    let (bundle, bytes) = match path {
        Some(p) => verdict_model::model_file::read_model_file(p).with_context(context)?,
        None => (
            ModelBundle::from_bytes(BUILT_IN).with_context(context)?,
            BUILT_IN.to_vec(),
        ),
    };
    bundle.check_schema(&schema).with_context(context)?;
    Ok(LoadedModel {
        bundle,
        source,
        sha256: verdict_model::sha256_hex(&bytes),
    })
}

/// The model's identity as run.json records it.
pub fn model_record(model: &LoadedModel) -> crate::run_record::ModelRecord {
    crate::run_record::ModelRecord {
        source: model.source.clone(),
        sha256: model.sha256.clone(),
        training_spec: crate::run_record::SpecRecord {
            name: model.bundle.spec.name.clone(),
            hash: model.bundle.spec.hash.clone(),
        },
        schema_hash: model.bundle.schema_hash.clone(),
    }
}
