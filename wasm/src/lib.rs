//! The site app's reduction in the browser: the very modules the server runs
//! (`src/reduction/`, `src/present.rs`, `src/site_form.rs`), mounted at the same paths so
//! their `crate::` references resolve, and exported as plain C functions that take and
//! return JSON in linear memory (no wasm-bindgen: the JavaScript side is a few lines).

// Only the entry form's part of these modules is used here; the rest serves the server.
#![allow(dead_code)]

#[path = "../../src/present.rs"]
pub mod present;
#[path = "../../src/readings.rs"]
pub mod readings;
#[path = "../../src/reduction/mod.rs"]
pub mod reduction;
#[path = "../../src/site_form.rs"]
pub mod site_form;

use serde::Deserialize;

use present::Units;
use reduction::site::LotRules;
use reduction::{ChainageStyle, UnitSystem};

/// One preview request from the page: the cached lot's rules, the project's units and
/// the form as typed.
#[derive(Deserialize)]
struct AnswerRequest {
    rules: LotRules,
    unit_system: String,
    chainage_style: String,
    form: site_form::EntryForm,
    #[serde(default)]
    retest: bool,
    /// The instrument register kept for the lot (absent on a page kept before it was served).
    #[serde(default)]
    instruments: Option<reduction::site::LotInstruments>,
    /// The phone's date (UTC), for a test whose form gives no time.
    #[serde(default)]
    today: String,
}

/// The JSON answer to a request (the server's `/lots/{id}/entry/preview` answer).
pub fn answer_json(request: &str) -> String {
    let req: AnswerRequest = match serde_json::from_str(request) {
        Ok(r) => r,
        Err(e) => {
            return serde_json::json!({"errors": {"form": format!("bad request to the site library: {e}")}})
                .to_string();
        }
    };
    let units = Units {
        system: UnitSystem::parse_code(&req.unit_system).unwrap_or(UnitSystem::Si),
        chainage: ChainageStyle::parse_code(&req.chainage_style).unwrap_or(ChainageStyle::KmMetre),
    };
    site_form::answer(
        &req.rules,
        req.instruments.as_ref(),
        &units,
        &req.form,
        req.retest,
        &req.today,
    )
    .to_string()
}

/// Reserves `len` bytes for the page to write a request into.
#[unsafe(no_mangle)]
pub extern "C" fn site_alloc(len: usize) -> *mut u8 {
    let mut buf = Vec::<u8>::with_capacity(len.max(1));
    let ptr = buf.as_mut_ptr();
    std::mem::forget(buf);
    ptr
}

/// Gives back a buffer from [`site_alloc`] or [`site_answer`].
///
/// # Safety
/// `ptr` and `cap` must be a buffer this module handed out, freed once.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn site_free(ptr: *mut u8, cap: usize) {
    // SAFETY: the caller returns a buffer made by `site_alloc`/`site_answer` with its capacity.
    unsafe { drop(Vec::from_raw_parts(ptr, 0, cap.max(1))) };
}

/// Answers the JSON request at `ptr..ptr+len` (which it frees); returns a buffer whose
/// first four bytes are the answer's length (little-endian), then the UTF-8 answer.
///
/// # Safety
/// `ptr`/`len` must be a buffer from [`site_alloc`] of capacity `len` holding the request.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn site_answer(ptr: *mut u8, len: usize) -> *mut u8 {
    // SAFETY: the page wrote `len` bytes into a buffer of that capacity from `site_alloc`.
    let bytes = unsafe { Vec::from_raw_parts(ptr, len, len.max(1)) };
    let answer = answer_json(&String::from_utf8_lossy(&bytes));
    let mut out = Vec::with_capacity(answer.len() + 4);
    out.extend_from_slice(
        &u32::try_from(answer.len())
            .unwrap_or(u32::MAX)
            .to_le_bytes(),
    );
    out.extend_from_slice(answer.as_bytes());
    out.shrink_to_fit();
    let p = out.as_mut_ptr();
    std::mem::forget(out);
    p
}
