//! Payload edits with the checksum recomputed: the input is a list of (offset, byte) edits
//! applied to the shipped model's payload, which is then framed with a fresh, correct header
//! and checksum. The loader must refuse the result with a one-line message, or accept a
//! model that re-saves to the same bytes and predicts without panicking, with probabilities
//! in [0, 1] (`verdict_model::model_file::check_model_bytes`).
#![no_main]

use verdict_model::model_file::{check_model_bytes, frame_payload, payload_of};

const SHIPPED: &[u8] = include_bytes!("../../models/default-model.bin");

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    let mut payload = payload_of(SHIPPED).expect("the shipped model has a header").to_vec();
    // Each edit is 5 bytes: a little-endian offset (modulo the payload length) and a value.
    for edit in data.chunks_exact(5) {
        let at = u32::from_le_bytes([edit[0], edit[1], edit[2], edit[3]]) as usize;
        let k = at % payload.len();
        payload[k] = edit[4];
    }
    check_model_bytes(&frame_payload(&payload));
});
