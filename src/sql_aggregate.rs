//! The life-data aggregates' link to SQLite's C interface for aggregate and
//! window functions.
//!
//! Every other function goes through rusqlite's safe wrappers. The
//! aggregates (`life_fit`, `life_fit_interval`, `life_fit_all`, `life_km`,
//! `life_compare`, ...) are registered here with
//! `sqlite3_create_window_function` directly, for a measured reason: their
//! step runs once per row over millions of rows, and under rusqlite's generic
//! aggregate wrapper (unwind guard, context object, value conversion, a
//! large error type) the wrapper cost about as much per row as the counting
//! itself.
//! Measured with callgrind on tests/bench's quick database (`life_fit` over
//! 1 000 000 lives): our side of each row (wrapper, value conversion, step
//! and counting) went from about 390 instructions to about 250, most of the
//! cut in the wrapper and conversion. The per-row logic, every check and
//! every message stay in safe code ([`LifeAggregate::step`]); this module
//! only moves values and state across the C boundary.
//!
//! The state lives in a `Box` whose pointer SQLite keeps in the aggregate
//! context; `x_final` frees it (SQLite calls xFinal for every aggregate
//! context it allocated, also when a statement stops on an error;
//! `tests/valgrind.rs` runs such statements under a full leak check).
//! Panics never cross the boundary: each callback catches them and reports
//! an SQL error.

use crate::sql::{error_text, LifeAggregate, State};
use rusqlite::ffi;
use rusqlite::functions::FunctionFlags;
use rusqlite::types::ValueRef;
use rusqlite::Connection;
use std::ffi::{c_int, c_void, CString};
use std::panic::{catch_unwind, AssertUnwindSafe};

/// Most arguments any life-data aggregate takes.
const MOST_ARGS: usize = 8;

/// Registers `agg` under its name for `n_args` arguments.
pub(crate) fn register(
    conn: &Connection,
    n_args: i32,
    flags: FunctionFlags,
    agg: LifeAggregate,
) -> rusqlite::Result<()> {
    assert!(n_args >= 0 && n_args as usize <= MOST_ARGS);
    let name = CString::new(agg.name).expect("function names have no NUL");
    let user_data = Box::into_raw(Box::new(agg));
    // SAFETY: the handle is a live connection for the duration of the call;
    // SQLite owns `user_data` from here on and hands it to `x_destroy` when
    // the function is dropped or the registration fails.
    let rc = unsafe {
        ffi::sqlite3_create_window_function(
            conn.handle(),
            name.as_ptr(),
            n_args,
            flags.bits(),
            user_data.cast::<c_void>(),
            Some(x_step),
            Some(x_final),
            Some(x_value),
            Some(x_inverse),
            Some(x_destroy),
        )
    };
    if rc == ffi::SQLITE_OK {
        Ok(())
    } else {
        Err(rusqlite::Error::SqliteFailure(
            ffi::Error::new(rc),
            Some(format!("registering {} failed", name.to_string_lossy())),
        ))
    }
}

/// Reads one SQL value without copying.
///
/// # Safety
/// `v` must be a protected value handed to the current callback; the
/// returned reference must not outlive the callback.
#[inline]
unsafe fn value<'a>(v: *mut ffi::sqlite3_value) -> ValueRef<'a> {
    match ffi::sqlite3_value_type(v) {
        ffi::SQLITE_INTEGER => ValueRef::Integer(ffi::sqlite3_value_int64(v)),
        ffi::SQLITE_FLOAT => ValueRef::Real(ffi::sqlite3_value_double(v)),
        ffi::SQLITE_TEXT => ValueRef::Text(bytes(ffi::sqlite3_value_text(v), v)),
        ffi::SQLITE_BLOB => ValueRef::Blob(bytes(ffi::sqlite3_value_blob(v).cast(), v)),
        _ => ValueRef::Null,
    }
}

/// The bytes of a text or blob value whose data pointer is `p` (empty for
/// a null pointer: an empty blob, or text SQLite could not convert).
///
/// # Safety
/// As [`value`]; `p` must be what SQLite returned for `v`.
#[inline]
unsafe fn bytes<'a>(p: *const u8, v: *mut ffi::sqlite3_value) -> &'a [u8] {
    let n = ffi::sqlite3_value_bytes(v);
    if p.is_null() || n <= 0 {
        &[]
    } else {
        std::slice::from_raw_parts(p, n as usize)
    }
}

/// Sets an error result.
///
/// # Safety
/// `ctx` must be the current callback's context.
unsafe fn set_error(ctx: *mut ffi::sqlite3_context, text: &str) {
    let bytes = text.as_bytes();
    let n = c_int::try_from(bytes.len()).unwrap_or(c_int::MAX);
    ffi::sqlite3_result_error(ctx, bytes.as_ptr().cast(), n);
}

/// The aggregate registered with this context.
///
/// # Safety
/// `ctx` must belong to a function registered by [`register`].
#[inline]
unsafe fn aggregate<'a>(ctx: *mut ffi::sqlite3_context) -> &'a LifeAggregate {
    &*ffi::sqlite3_user_data(ctx).cast::<LifeAggregate>()
}

/// The slot in SQLite's aggregate context that holds the state's pointer;
/// None when SQLite is out of memory (or, with `create` false, when no row
/// has been seen).
///
/// # Safety
/// `ctx` must be the current callback's context.
#[inline]
unsafe fn state_slot(ctx: *mut ffi::sqlite3_context, create: bool) -> Option<*mut *mut State> {
    let size = if create {
        std::mem::size_of::<*mut State>() as c_int
    } else {
        0
    };
    let slot = ffi::sqlite3_aggregate_context(ctx, size).cast::<*mut State>();
    (!slot.is_null()).then_some(slot)
}

/// Shared body of xStep and xInverse.
///
/// # Safety
/// The arguments are those SQLite passes to the callback.
#[inline]
unsafe fn row(
    ctx: *mut ffi::sqlite3_context,
    argc: c_int,
    argv: *mut *mut ffi::sqlite3_value,
    forward: bool,
) {
    let Some(slot) = state_slot(ctx, true) else {
        ffi::sqlite3_result_error_nomem(ctx);
        return;
    };
    let agg = aggregate(ctx);
    let n = (argc.max(0) as usize).min(MOST_ARGS);
    let mut args = [ValueRef::Null; MOST_ARGS];
    for (i, a) in args.iter_mut().enumerate().take(n) {
        *a = value(*argv.add(i));
    }
    let outcome = catch_unwind(AssertUnwindSafe(|| {
        if (*slot).is_null() {
            *slot = Box::into_raw(Box::default());
        }
        let st = &mut **slot;
        if forward {
            agg.step(&args[..n], st)
        } else {
            agg.inverse(&args[..n], st)
        }
    }));
    match outcome {
        Ok(Ok(())) => {}
        Ok(Err(e)) => set_error(ctx, &error_text(agg.name, e)),
        Err(_) => set_error(ctx, &error_text(agg.name, "internal error (panic)")),
    }
}

unsafe extern "C" fn x_step(
    ctx: *mut ffi::sqlite3_context,
    argc: c_int,
    argv: *mut *mut ffi::sqlite3_value,
) {
    row(ctx, argc, argv, true);
}

unsafe extern "C" fn x_inverse(
    ctx: *mut ffi::sqlite3_context,
    argc: c_int,
    argv: *mut *mut ffi::sqlite3_value,
) {
    row(ctx, argc, argv, false);
}

/// Sets the aggregate's value for `st` (NULL when no row was seen).
///
/// # Safety
/// `ctx` must be the current callback's context.
unsafe fn answer(ctx: *mut ffi::sqlite3_context, st: Option<&State>) {
    let agg = aggregate(ctx);
    let outcome = catch_unwind(AssertUnwindSafe(|| match st {
        None => Ok(None),
        Some(st) => agg.result(st),
    }));
    match outcome {
        Ok(Ok(None)) => ffi::sqlite3_result_null(ctx),
        Ok(Ok(Some(text))) => match c_int::try_from(text.len()) {
            Ok(n) => {
                ffi::sqlite3_result_text(ctx, text.as_ptr().cast(), n, ffi::SQLITE_TRANSIENT())
            }
            Err(_) => ffi::sqlite3_result_error_toobig(ctx),
        },
        Ok(Err(e)) => set_error(ctx, &error_text(agg.name, e)),
        Err(_) => set_error(ctx, &error_text(agg.name, "internal error (panic)")),
    }
}

unsafe extern "C" fn x_value(ctx: *mut ffi::sqlite3_context) {
    let st = state_slot(ctx, false)
        .map(|slot| *slot)
        .filter(|p| !p.is_null());
    answer(ctx, st.map(|p| &*p));
}

unsafe extern "C" fn x_final(ctx: *mut ffi::sqlite3_context) {
    let st = state_slot(ctx, false).and_then(|slot| {
        let p = std::mem::replace(&mut *slot, std::ptr::null_mut());
        (!p.is_null()).then(|| Box::from_raw(p))
    });
    answer(ctx, st.as_deref());
    // The state drops here; a panic in a destructor would abort, and
    // State's fields (maps and vectors of numbers) do not panic on drop.
}

unsafe extern "C" fn x_destroy(user_data: *mut c_void) {
    if !user_data.is_null() {
        drop(Box::from_raw(user_data.cast::<LifeAggregate>()));
    }
}
