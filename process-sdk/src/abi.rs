//! The plumbing behind `export_process!`: what the generated wasm exports
//! call. Module authors never touch this; it is `#[doc(hidden)]`.
//!
//! Why this exists: ABI v1 passes raw guest addresses and lengths. All of
//! the unsafe pointer work lives here, once, so that a law's code is plain
//! safe Rust over slices. Everything here also compiles natively, so it can
//! be unit-tested without wasm.

use std::alloc::Layout;
use std::sync::{Mutex, Once};

use crate::manifest::{Manifest, ParamKind, Role};
use crate::params::Params;
use crate::records::Record;
use crate::roles::{ErrorCode, Process, ProcessError};

/// Where the one instance of a module's law lives inside the guest.
pub struct Slot<T>(Mutex<Option<T>>);

impl<T> Slot<T> {
    /// An empty slot (before `init`).
    pub const fn new() -> Slot<T> {
        Slot(Mutex::new(None))
    }
}

impl<T> Default for Slot<T> {
    fn default() -> Self {
        Slot::new()
    }
}

static LAST_ERROR: Mutex<String> = Mutex::new(String::new());
static PANIC_HOOK: Once = Once::new();

fn set_error(e: &ProcessError) -> i32 {
    let mut last = LAST_ERROR.lock().unwrap_or_else(|p| p.into_inner());
    last.clear();
    last.push_str(&e.message);
    -(e.code as i32)
}

/// Allocate `size` bytes aligned to `align` in guest memory; null on failure.
pub fn alloc(size: usize, align: usize) -> *mut u8 {
    let Ok(layout) = Layout::from_size_align(size.max(1), align.max(1)) else {
        return core::ptr::null_mut();
    };
    // SAFETY: the layout has a non-zero size.
    unsafe { std::alloc::alloc(layout) }
}

/// Free a block returned by [`alloc`] with the same size and alignment.
///
/// # Safety
/// `ptr` must come from `alloc(size, align)` and not have been freed.
pub unsafe fn free(ptr: *mut u8, size: usize, align: usize) {
    if ptr.is_null() {
        return;
    }
    if let Ok(layout) = Layout::from_size_align(size.max(1), align.max(1)) {
        // SAFETY: guaranteed by the caller.
        unsafe { std::alloc::dealloc(ptr, layout) }
    }
}

/// Decode and validate parameters, then build the law into `slot`.
///
/// # Safety
/// `ptr..ptr+len` must be readable (it is guest memory written by the host).
pub unsafe fn init<T: Process>(slot: &Slot<T>, ptr: *const u8, len: usize) -> i32 {
    PANIC_HOOK.call_once(|| {
        // Keep the panic message so the host can report it after the trap.
        std::panic::set_hook(Box::new(|info| {
            let mut last = LAST_ERROR.lock().unwrap_or_else(|p| p.into_inner());
            *last = format!("module panicked: {info}");
        }));
    });
    let bytes: &[u8] = if len == 0 || ptr.is_null() {
        &[]
    } else {
        // SAFETY: guaranteed by the caller.
        unsafe { core::slice::from_raw_parts(ptr, len) }
    };
    let schema = T::MANIFEST.to_info().parameters;
    match Params::decode(bytes, &schema).and_then(|p| T::new(&p)) {
        Ok(law) => {
            *slot.0.lock().unwrap_or_else(|p| p.into_inner()) = Some(law);
            0
        }
        Err(e) => set_error(&e),
    }
}

/// A law's batch method, as a plain function pointer.
pub type BatchFn<T, I, O> = fn(&mut T, &[I], &mut [O]) -> Result<(), ProcessError>;

/// One batch call: `n` input records at `input`, `n` output records at `output`.
/// Returns `n` on success, or a negative domain error code.
///
/// # Safety
/// `input` and `output` must each address `n` records of guest memory.
pub unsafe fn batch<T, I: Record, O: Record>(
    slot: &Slot<T>,
    input: *const I,
    n: usize,
    output: *mut O,
    law: BatchFn<T, I, O>,
) -> i32 {
    if n > i32::MAX as usize {
        return set_error(&ProcessError::new(ErrorCode::InvalidInput, "batch too large"));
    }
    let aligned = |p: usize, a: usize| p.is_multiple_of(a);
    if n > 0
        && (input.is_null()
            || output.is_null()
            || !aligned(input as usize, core::mem::align_of::<I>())
            || !aligned(output as usize, core::mem::align_of::<O>()))
    {
        return set_error(&ProcessError::new(
            ErrorCode::InvalidInput,
            "batch buffers are null or misaligned; buffers must come from exobound_alloc",
        ));
    }
    let mut guard = slot.0.lock().unwrap_or_else(|p| p.into_inner());
    let Some(state) = guard.as_mut() else {
        return set_error(&ProcessError::new(
            ErrorCode::NotInitialised,
            "exobound_init has not succeeded yet",
        ));
    };
    let (inp, out): (&[I], &mut [O]) = if n == 0 {
        (&[], &mut [])
    } else {
        // SAFETY: non-null, aligned, and sized by the caller's guarantee.
        unsafe {
            (core::slice::from_raw_parts(input, n), core::slice::from_raw_parts_mut(output, n))
        }
    };
    match law(state, inp, out) {
        Ok(()) => n as i32,
        Err(e) => set_error(&e),
    }
}

/// Copy the last error message into `buf` (at most `cap` bytes); returns its
/// full length in bytes.
///
/// # Safety
/// `buf..buf+cap` must be writable.
pub unsafe fn last_error(buf: *mut u8, cap: usize) -> usize {
    let last = LAST_ERROR.lock().unwrap_or_else(|p| p.into_inner());
    let bytes = last.as_bytes();
    let k = bytes.len().min(cap);
    if k > 0 && !buf.is_null() {
        // SAFETY: guaranteed by the caller.
        unsafe { core::ptr::copy_nonoverlapping(bytes.as_ptr(), buf, k) }
    }
    bytes.len()
}

/// The `exobound:abi` section of a module with manifest `m`: the oldest ABI
/// version that can run it, 1.1.0 if it declares a table parameter (which a
/// 1.0 host cannot decode), else 1.0.0.
pub const fn version_bytes(m: &Manifest) -> [u8; 5] {
    let mut i = 0;
    while i < m.parameters.len() {
        if matches!(m.parameters[i].kind, ParamKind::Table { .. }) {
            return crate::ABI_VERSION_BYTES;
        }
        i += 1;
    }
    crate::ABI_BASE_VERSION_BYTES
}

/// Compile-time check that the roles listed in `export_process!` are
/// exactly the roles declared in the manifest.
pub const fn check_roles(declared: &[Role], listed: &[Role]) {
    const fn contains(set: &[Role], r: Role) -> bool {
        let mut i = 0;
        while i < set.len() {
            if set[i] as u8 == r as u8 {
                return true;
            }
            i += 1;
        }
        false
    }
    let mut i = 0;
    while i < listed.len() {
        if !contains(declared, listed[i]) {
            panic!("export_process!: a role listed in the macro is missing from MANIFEST.roles");
        }
        i += 1;
    }
    i = 0;
    while i < declared.len() {
        if !contains(listed, declared[i]) {
            panic!("export_process!: MANIFEST.roles declares a role the macro does not export");
        }
        i += 1;
    }
}
