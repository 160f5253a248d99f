//! The loadable SQLite extension: only the entry point lives here.
//!
//! SQLite derives the entry point `sqlite3_lifedata_init` from the file name
//! `liblifedata.so`. Before anything else the host's SQLite version is
//! checked against the oldest one this build supports, so an old host gets
//! a clear error message instead of an abort. All unsafe code of the
//! project is in this file.

use rusqlite::{ffi, Connection};
use std::os::raw::{c_char, c_int};

/// Oldest SQLite this extension runs in: 3.34.1, the API table that
/// rusqlite 0.40's extension bindings are generated from.
pub const MIN_SQLITE_VERSION: c_int = 3_034_001;

/// Writes `msg` into SQLite's error-message slot, allocated with the host's
/// own allocator as the loader requires.
///
/// # Safety
/// `p_api` must be the routine table SQLite passed to the entry point.
unsafe fn set_error(
    p_api: *const ffi::sqlite3_api_routines,
    pz_err_msg: *mut *mut c_char,
    msg: &str,
) {
    if pz_err_msg.is_null() {
        return;
    }
    let Some(malloc) = (*p_api).malloc else {
        return;
    };
    let bytes = msg.as_bytes();
    let buf = malloc((bytes.len() + 1) as c_int) as *mut u8;
    if buf.is_null() {
        return;
    }
    std::ptr::copy_nonoverlapping(bytes.as_ptr(), buf, bytes.len());
    *buf.add(bytes.len()) = 0;
    *pz_err_msg = buf as *mut c_char;
}

fn init(db: Connection) -> rusqlite::Result<bool> {
    lifedata::register(&db)?;
    Ok(false)
}

/// Entry point SQLite calls on `.load .../liblifedata` or `load_extension()`.
///
/// # Safety
/// Called by SQLite with a valid connection, error slot and API table.
#[no_mangle]
pub unsafe extern "C" fn sqlite3_lifedata_init(
    db: *mut ffi::sqlite3,
    pz_err_msg: *mut *mut c_char,
    p_api: *mut ffi::sqlite3_api_routines,
) -> c_int {
    if p_api.is_null() || db.is_null() {
        return ffi::SQLITE_ERROR;
    }
    let host = match (*p_api).libversion_number {
        Some(f) => f(),
        None => 0,
    };
    if host < MIN_SQLITE_VERSION {
        set_error(
            p_api,
            pz_err_msg,
            &format!(
                "lifedata needs SQLite {} or newer; this host runs {}.{}.{}",
                "3.34.1",
                host / 1_000_000,
                host / 1000 % 1000,
                host % 1000
            ),
        );
        return ffi::SQLITE_ERROR;
    }
    match std::panic::catch_unwind(|| Connection::extension_init2(db, pz_err_msg, p_api, init)) {
        Ok(rc) => rc,
        Err(_) => {
            set_error(p_api, pz_err_msg, "lifedata: internal error while loading");
            ffi::SQLITE_ERROR
        }
    }
}

/// The generic entry point name, for hosts that load with an explicit
/// `sqlite3_extension_init` or copy the file under another name.
///
/// # Safety
/// As [`sqlite3_lifedata_init`].
#[no_mangle]
pub unsafe extern "C" fn sqlite3_extension_init(
    db: *mut ffi::sqlite3,
    pz_err_msg: *mut *mut c_char,
    p_api: *mut ffi::sqlite3_api_routines,
) -> c_int {
    sqlite3_lifedata_init(db, pz_err_msg, p_api)
}

#[cfg(test)]
mod tests {
    //! The version guard, driven with a fake API table as an old host would
    //! pass it (no old SQLite is needed to check the message).
    use super::*;
    use std::ffi::CStr;
    use std::os::raw::c_void;

    extern "C" {
        fn malloc(n: usize) -> *mut c_void;
        fn free(p: *mut c_void);
    }
    unsafe extern "C" fn old_version() -> c_int {
        3_031_001
    }
    unsafe extern "C" fn host_malloc(n: c_int) -> *mut c_void {
        malloc(n as usize)
    }

    #[test]
    fn old_host_gets_a_clear_error_not_an_abort() {
        unsafe {
            let mut api: ffi::sqlite3_api_routines = std::mem::zeroed();
            api.libversion_number = Some(old_version);
            api.malloc = Some(host_malloc);
            let mut msg: *mut c_char = std::ptr::null_mut();
            // Any non-null handle: the guard must refuse before touching it.
            let db = std::ptr::NonNull::<ffi::sqlite3>::dangling().as_ptr();
            let rc = sqlite3_lifedata_init(db, &mut msg, &mut api);
            assert_eq!(rc, ffi::SQLITE_ERROR);
            assert!(!msg.is_null());
            let text = CStr::from_ptr(msg).to_str().unwrap().to_owned();
            free(msg as *mut c_void);
            assert_eq!(
                text,
                "lifedata needs SQLite 3.34.1 or newer; this host runs 3.31.1"
            );
        }
    }

    #[test]
    fn missing_api_table_is_refused() {
        unsafe {
            let db = std::ptr::NonNull::<ffi::sqlite3>::dangling().as_ptr();
            let rc = sqlite3_lifedata_init(db, std::ptr::null_mut(), std::ptr::null_mut());
            assert_eq!(rc, ffi::SQLITE_ERROR);
        }
    }
}
