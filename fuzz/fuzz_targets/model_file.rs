//! Arbitrary bytes into the model-file loader: it must return a model or an error, never panic
//! or allocate what a crafted length claims; a model it accepts must re-save to a file that
//! loads again to the same bytes, and every error must be one line of text.
#![no_main]

use verdict_model::ModelBundle;

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    match ModelBundle::from_bytes(data) {
        Ok(bundle) => {
            let saved = bundle.to_bytes().expect("an accepted model re-encodes");
            let again = ModelBundle::from_bytes(&saved).expect("a re-saved model loads");
            assert_eq!(saved, again.to_bytes().expect("re-encodes"), "save-load-save changed bytes");
        }
        Err(err) => {
            let text = err.to_string();
            assert!(!text.is_empty() && !text.contains('\n'), "error is not one line: {text:?}");
        }
    }
});
