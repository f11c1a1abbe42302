//! The C interface (feature `capi`): a frozen model opened, queried and
//! closed from C or C++. The header is `src/capi/quern.h`, kept by hand
//! beside this file; `scripts/check-capi` checks that the two declare the
//! same functions and types, compiles a C program against the header and
//! the static library, and compares its answers with the command line's.
//!
//! Build the libraries (no RocksDB, no C++ compiler):
//!
//! ```text
//! cargo rustc --release --lib --no-default-features --features capi --crate-type staticlib,cdylib
//! ```
//!
//! Conventions, for every function:
//!
//! * No function unwinds into C: a panic inside quern is caught and turned
//!   into a failure like any other.
//! * A failure returns NULL, NaN or −1 (each function says which) and sets
//!   the calling thread's last error, read with [`quern_last_error`].
//! * Strings in are NUL-terminated UTF-8; strings out are owned by the
//!   object they come from and live as long as it.
//! * A `quern_model` is immutable once open: any number of threads may
//!   query one model at once. Close it once, after every query has
//!   returned.
#![allow(unsafe_code)]

use std::cell::RefCell;
use std::ffi::{c_char, c_double, c_int, CStr, CString};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;

use crate::model::Model;
use crate::predict::{Predictor, Scorer};
use crate::tokenize::query_ids;
use crate::topk::PrefixMatch;

/// An open model (opaque to C).
pub struct QuernModel {
    model: Model,
}

/// The top next words of one query (opaque to C): each word as the model
/// has it, NUL-terminated, with its log10 probability.
pub struct QuernWords {
    words: Vec<CString>,
    log10: Vec<f64>,
}

/// The totals of scoring a text, as `quern score --json` reports them.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default)]
pub struct QuernScore {
    /// Sentences scored (non-empty lines, or the sentences the model's
    /// preparation cuts them into).
    pub sentences: u64,
    /// Predictions: the words of each sentence and its end.
    pub predictions: u64,
    /// Predictions whose word is outside the vocabulary (scored as `<unk>`).
    pub oov: u64,
    /// Predictions that got probability 0.
    pub zero: u64,
    /// The sum of the predictions' log10 probabilities (−∞ if one is 0).
    pub log10_prob: f64,
    /// 10^(−log10_prob / predictions); +∞ if a prediction got 0, NaN if
    /// there was nothing to score.
    pub perplexity: f64,
}

thread_local! {
    static LAST_ERROR: RefCell<CString> = RefCell::new(CString::default());
}

fn set_error(msg: &str) {
    let text = CString::new(msg.replace('\0', " ")).unwrap_or_default();
    LAST_ERROR.with(|e| *e.borrow_mut() = text);
}

/// Runs `f`, turning an error or a panic into `failed` and the thread's
/// last error.
fn guarded<T>(failed: T, f: impl FnOnce() -> Result<T, String>) -> T {
    match catch_unwind(AssertUnwindSafe(f)) {
        Ok(Ok(v)) => v,
        Ok(Err(msg)) => {
            set_error(&msg);
            failed
        }
        Err(panic) => {
            let what = panic
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| panic.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "unknown".into());
            set_error(&format!("internal error in quern: {what}"));
            failed
        }
    }
}

/// A C string argument as UTF-8; `what` names it in the error.
///
/// # Safety
/// `s` is NULL or a NUL-terminated string that stays valid for `'a`.
unsafe fn text<'a>(s: *const c_char, what: &str) -> Result<&'a str, String> {
    if s.is_null() {
        return Err(format!("{what} is NULL"));
    }
    // SAFETY: non-null and NUL-terminated, as the caller promises.
    unsafe { CStr::from_ptr(s) }
        .to_str()
        .map_err(|e| format!("{what} is not UTF-8 ({e})"))
}

/// The model behind a handle.
///
/// # Safety
/// `m` is NULL or a handle from [`quern_model_open`] not yet closed.
unsafe fn model<'a>(m: *const QuernModel) -> Result<&'a Model, String> {
    // SAFETY: as the caller promises.
    unsafe { m.as_ref() }
        .map(|m| &m.model)
        .ok_or_else(|| "the model is NULL".to_string())
}

/// The last error of the calling thread: a NUL-terminated message naming
/// the file or argument, valid until the thread's next failing call; ""
/// before any failure.
#[no_mangle]
pub extern "C" fn quern_last_error() -> *const c_char {
    LAST_ERROR.with(|e| e.borrow().as_ptr())
}

/// Opens the model file at `path` (checking its header, directory and
/// checksums of the directory, as `quern` does; a truncated or damaged file
/// is refused). NULL on failure.
///
/// # Safety
/// `path` is NULL or a NUL-terminated string.
#[no_mangle]
pub unsafe extern "C" fn quern_model_open(path: *const c_char) -> *mut QuernModel {
    guarded(std::ptr::null_mut(), || {
        // SAFETY: as the caller promises.
        let path = unsafe { text(path, "the path") }?;
        let model = Model::open(Path::new(path)).map_err(|e| e.to_string())?;
        Ok(Box::into_raw(Box::new(QuernModel { model })))
    })
}

/// Closes a model; NULL is ignored.
///
/// # Safety
/// `m` is NULL or a handle from [`quern_model_open`], closed once, with no
/// query on it still running.
#[no_mangle]
pub unsafe extern "C" fn quern_model_close(m: *mut QuernModel) {
    if !m.is_null() {
        // SAFETY: made by Box::into_raw in quern_model_open, closed once.
        drop(unsafe { Box::from_raw(m) });
    }
}

/// The model's order N; −1 if `m` is NULL.
///
/// # Safety
/// `m` is NULL or an open handle.
#[no_mangle]
pub unsafe extern "C" fn quern_model_order(m: *const QuernModel) -> c_int {
    // SAFETY: as the caller promises.
    guarded(-1, || Ok(unsafe { model(m) }?.order() as c_int))
}

/// The size of the model's vocabulary |V| (`</s>` and `<unk>` included,
/// `<s>` not); 0 if `m` is NULL.
///
/// # Safety
/// `m` is NULL or an open handle.
#[no_mangle]
pub unsafe extern "C" fn quern_model_vocabulary_size(m: *const QuernModel) -> u64 {
    // SAFETY: as the caller promises.
    guarded(0, || Ok(unsafe { model(m) }?.vocabulary_size()))
}

/// log10 P(`word` | `context`). Both are prepared as the model's text was
/// (normalization, case, tokens, digits); `context` is words separated by
/// spaces and may begin with `<s>`, only its last N − 1 words count; words
/// outside the vocabulary are scored as `<unk>`. If `word` prepares to
/// several tokens, the last is predicted after the others. NaN on failure
/// (an empty `word`, a NULL argument).
///
/// # Safety
/// `m` is NULL or an open handle; `context` and `word` are NULL or
/// NUL-terminated strings.
#[no_mangle]
pub unsafe extern "C" fn quern_model_log10(
    m: *const QuernModel,
    context: *const c_char,
    word: *const c_char,
) -> c_double {
    guarded(f64::NAN, || {
        // SAFETY: as the caller promises.
        let (model, context, word) = unsafe {
            (
                model(m)?,
                text(context, "the context")?,
                text(word, "the word")?,
            )
        };
        let prep = model.preparation();
        let mut ids = query_ids(context, &prep);
        let word_ids = query_ids(word, &prep);
        if word_ids.is_empty() {
            return Err(format!("the word {word:?} holds no token"));
        }
        ids.extend_from_slice(&word_ids);
        let (last, ctx) = ids.split_last().expect("at least one id");
        let p = Model::prob(model, ctx, *last).map_err(|e| e.to_string())?;
        Ok(p.log10)
    })
}

/// The `k` most probable next words after `context` (prepared as for
/// [`quern_model_log10`]) that begin with `prefix` (NULL or "" for any
/// word), best first, ties by the words' bytes: exactly the words of
/// `quern next --json`. With `folded` non-zero the prefix matches without
/// regard to case and accents (`--match folded`: `gu` offers
/// `Guillemot`), each word shown as the model has it. Free the answer with
/// [`quern_words_free`]. NULL on failure.
///
/// # Safety
/// `m` is NULL or an open handle; `context` and `prefix` are NULL or
/// NUL-terminated strings (a NULL context is the empty context).
#[no_mangle]
pub unsafe extern "C" fn quern_model_next(
    m: *const QuernModel,
    context: *const c_char,
    prefix: *const c_char,
    folded: c_int,
    k: usize,
) -> *mut QuernWords {
    guarded(std::ptr::null_mut(), || {
        // SAFETY: as the caller promises.
        let model = unsafe { model(m) }?;
        let context = if context.is_null() {
            ""
        } else {
            // SAFETY: as the caller promises.
            unsafe { text(context, "the context") }?
        };
        let prefix = if prefix.is_null() {
            ""
        } else {
            // SAFETY: as the caller promises.
            unsafe { text(prefix, "the prefix") }?
        };
        let ids = query_ids(context, &model.preparation());
        let matching = if folded != 0 {
            PrefixMatch::Folded
        } else {
            PrefixMatch::Exact
        };
        let next = Predictor::complete_matching(model, &ids, prefix, matching, k)
            .map_err(|e| e.to_string())?;
        let mut out = QuernWords {
            words: Vec::with_capacity(next.items.len()),
            log10: Vec::with_capacity(next.items.len()),
        };
        for (w, p) in next.items {
            let word = model
                .word(w)
                .ok_or_else(|| format!("word id {w:#x} is not in the model"))?;
            out.words
                .push(CString::new(word).map_err(|e| e.to_string())?);
            out.log10.push(p.log10());
        }
        Ok(Box::into_raw(Box::new(out)))
    })
}

/// How many words an answer holds (at most the `k` asked); 0 for NULL.
///
/// # Safety
/// `w` is NULL or an answer of [`quern_model_next`] not yet freed.
#[no_mangle]
pub unsafe extern "C" fn quern_words_count(w: *const QuernWords) -> usize {
    // SAFETY: as the caller promises.
    unsafe { w.as_ref() }.map_or(0, |w| w.words.len())
}

/// Word `i` of an answer (UTF-8, NUL-terminated, owned by the answer);
/// NULL if `i` is out of range.
///
/// # Safety
/// `w` is NULL or an answer of [`quern_model_next`] not yet freed.
#[no_mangle]
pub unsafe extern "C" fn quern_words_word(w: *const QuernWords, i: usize) -> *const c_char {
    // SAFETY: as the caller promises.
    match unsafe { w.as_ref() }.and_then(|w| w.words.get(i)) {
        Some(s) => s.as_ptr(),
        None => {
            set_error(&format!("no word {i} in the answer"));
            std::ptr::null()
        }
    }
}

/// The log10 probability of word `i` of an answer; NaN if `i` is out of
/// range.
///
/// # Safety
/// `w` is NULL or an answer of [`quern_model_next`] not yet freed.
#[no_mangle]
pub unsafe extern "C" fn quern_words_log10(w: *const QuernWords, i: usize) -> c_double {
    // SAFETY: as the caller promises.
    match unsafe { w.as_ref() }.and_then(|w| w.log10.get(i)) {
        Some(&x) => x,
        None => {
            set_error(&format!("no word {i} in the answer"));
            f64::NAN
        }
    }
}

/// Frees an answer of [`quern_model_next`]; NULL is ignored.
///
/// # Safety
/// `w` is NULL or an answer not yet freed.
#[no_mangle]
pub unsafe extern "C" fn quern_words_free(w: *mut QuernWords) {
    if !w.is_null() {
        // SAFETY: made by Box::into_raw in quern_model_next, freed once.
        drop(unsafe { Box::from_raw(w) });
    }
}

/// Scores `text` as `quern score` scores a file: each line (split at
/// `\n`, a trailing `\r` dropped) is a sentence, or the sentences the
/// model's preparation cuts it into; each sentence is its words and `</s>`
/// predicted after `<s>`. Fills `out`; 0 on success, −1 on failure.
///
/// # Safety
/// `m` is NULL or an open handle; `text` is NULL or a NUL-terminated
/// string; `out` is NULL or points to a writable `quern_score`.
#[no_mangle]
pub unsafe extern "C" fn quern_model_score(
    m: *const QuernModel,
    text: *const c_char,
    out: *mut QuernScore,
) -> c_int {
    guarded(-1, || {
        // SAFETY: as the caller promises.
        let (model, body) = unsafe { (model(m)?, self::text(text, "the text")?) };
        if out.is_null() {
            return Err("the score's destination is NULL".into());
        }
        let mut scorer = Scorer::new(model, false);
        for (no, line) in body.split('\n').enumerate() {
            scorer
                .add_line(no as u64 + 1, line.as_bytes())
                .map_err(|e| format!("line {}: {e}", no + 1))?;
        }
        let r = scorer.finish().map_err(|e| e.to_string())?;
        let score = QuernScore {
            sentences: r.sentences,
            predictions: r.predictions,
            oov: r.oov,
            zero: r.zero,
            log10_prob: r.log10_prob().unwrap_or(f64::NEG_INFINITY),
            perplexity: if r.predictions == 0 {
                f64::NAN
            } else {
                r.perplexity().unwrap_or(f64::INFINITY)
            },
        };
        // SAFETY: non-null and writable, as the caller promises.
        unsafe { out.write(score) };
        Ok(0)
    })
}
